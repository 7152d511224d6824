// The gate's reason sentences (gate_internal.h): each names the numbers it
// compares, in plain words.
#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "absl/strings/str_join.h"
#include "service/core/gate_internal.h"

namespace riskbound::core::gate_internal {
namespace {

// The champion comparison in one clause, for the summary.
std::string ComparisonClause(const Findings& f, const Measured& m) {
  const std::string& id = *m.champion_id;
  if (f.cmp_reject) {
    return absl::StrCat("the candidate is worse than champion '", id, "' by at least ",
                        Num(*m.difference_lower), ", beyond the tolerated ", Num(m.tolerance));
  }
  if (f.cmp_promote) {
    return absl::StrCat("the candidate is at most ", Num(*m.difference_upper),
                        " worse than champion '", id, "' (tolerated ", Num(m.tolerance), ")");
  }
  return absl::StrCat("the comparison with champion '", id,
                      "' is not settled: the difference may be up to ",
                      Num(*m.difference_upper), " against a tolerated ", Num(m.tolerance));
}

// Up to four slice names, quoted, then how many more.
std::string SliceNames(const std::vector<const SliceCheck*>& slices) {
  std::vector<std::string> names;
  for (std::size_t i = 0; i < slices.size() && i < 4; ++i) {
    names.push_back(absl::StrCat("'", slices[i]->slice_name, "'"));
  }
  std::string out = absl::StrJoin(names, ", ");
  if (slices.size() > 4) absl::StrAppend(&out, " and ", slices.size() - 4, " more");
  return out;
}

std::vector<const SliceCheck*> SlicesWith(const Measured& m, SliceOutcome outcome) {
  std::vector<const SliceCheck*> out;
  for (const SliceCheck& s : m.slices) {
    if (s.outcome == outcome) out.push_back(&s);
  }
  return out;
}

// The slices in one clause, for the summary.
std::string SliceClause(const Findings& f, const Measured& m) {
  if (f.slices_reject) {
    const std::vector<const SliceCheck*> bad = SlicesWith(m, SliceOutcome::kExceeds);
    const SliceCheck& w = *bad.front();
    return absl::StrCat(bad.size() == 1 ? "slice " : "slices ", SliceNames(bad),
                        bad.size() == 1 ? " exceeds its limit" : " exceed their limits",
                        " with confidence (", bad.size() == 1 ? "" : "worst: ", "'",
                        w.slice_name, "' lower bound ", Num(w.risk_lower_bound), " > limit ",
                        Num(w.max_risk), ")");
  }
  if (f.slices_promote) {
    const SliceCheck& w = m.slices.front();
    return absl::StrCat("every one of the ", m.slices.size(),
                        " slices clears its limit (closest: '", w.slice_name, "', at most ",
                        Num(w.risk_upper_bound), " against ", Num(w.max_risk), ")");
  }
  const std::vector<const SliceCheck*> open = SlicesWith(m, SliceOutcome::kUndecided);
  return absl::StrCat(open.size(), " of the ", m.slices.size(), " slices ",
                      open.size() == 1 ? "is" : "are", " undecided (", SliceNames(open),
                      "): more labelled samples from ", open.size() == 1 ? "it" : "them",
                      " are needed");
}

}  // namespace

std::string Num(double v) { return absl::StrFormat("%.6g", v); }

std::string SliceSentence(const SliceCheck& s, bool sequential) {
  const char* where = s.outcome == SliceOutcome::kClears    ? "clears its limit"
                      : s.outcome == SliceOutcome::kExceeds ? "exceeds its limit"
                                                            : "is undecided against its limit";
  return absl::StrCat("slice '", s.slice_name, "' ", where, " ", Num(s.max_risk),
                      ": true error between ", Num(s.risk_lower_bound), " and ",
                      Num(s.risk_upper_bound), " (", s.error_count, " errors in ",
                      s.sample_count, " samples, ",
                      sequential ? "anytime-valid" : "Clopper-Pearson",
                      ", failure probability ", Num(s.failure_probability), ")");
}

std::string SummaryReason(const Decision& decision, const Findings& f, const Measured& m) {
  const double upper = m.risk_certificate.risk_upper_bound;
  switch (decision.rule) {
    case Rule::kBelowMinimum: {
      std::string s = absl::StrCat("HOLD: ", m.held, " hold-out samples, fewer than the policy's ",
                                   "minimum of ", m.min_holdout_sample_count,
                                   "; more labelled data is needed before a verdict");
      if (f.risk_reject || f.cmp_reject || f.slices_reject) {
        absl::StrAppend(&s, " (the bounds alone would already REJECT)");
      } else if (f.risk_promote && f.cmp_promote && f.slices_promote) {
        absl::StrAppend(&s, " (the bounds alone would PROMOTE)");
      }
      return s;
    }
    case Rule::kReject: {
      std::vector<std::string> why;
      if (f.risk_reject) {
        why.push_back(absl::StrCat("the true error is above the threshold ", Num(m.max_risk),
                                   " with confidence (lower bound ", Num(*m.risk_lower_bound),
                                   ")"));
      }
      if (f.cmp_reject) why.push_back(ComparisonClause(f, m));
      if (f.slices_reject) why.push_back(SliceClause(f, m));
      return absl::StrCat("REJECT: ", absl::StrJoin(why, "; and "),
                          "; more data is not expected to change this");
    }
    case Rule::kPromote: {
      std::string s = absl::StrCat("PROMOTE: the true error is at most ", Num(upper),
                                   ", at or below the threshold ", Num(m.max_risk));
      if (f.has_champion) absl::StrAppend(&s, "; and ", ComparisonClause(f, m));
      if (!m.slices.empty()) absl::StrAppend(&s, "; and ", SliceClause(f, m));
      return s;
    }
    case Rule::kUnsettled:
      break;
  }
  std::vector<std::string> why;
  if (!f.risk_promote) {
    why.push_back(absl::StrCat("the true error may be up to ", Num(upper),
                               ", above the threshold ", Num(m.max_risk),
                               ", but is not shown to exceed it"));
  }
  if (!f.cmp_promote) why.push_back(ComparisonClause(f, m));
  if (!f.slices_promote) why.push_back(SliceClause(f, m));
  return absl::StrCat("HOLD: ", absl::StrJoin(why, "; and "));
}

std::vector<std::string> BoundReasons(const Findings& f, const Measured& m) {
  std::vector<std::string> out;
  const double upper = m.risk_certificate.risk_upper_bound;
  if (m.sequential) {
    out.push_back(
        "sequential mode: every hold-out bound is anytime-valid (a confidence sequence that "
        "holds for every hold-out size at once: beta-binomial mixture martingale, Robbins "
        "1970, with Ville's inequality), so re-running the gate on the grown hold-out set "
        "after each batch keeps the promise at the same failure probability");
  }
  for (const FamilySpec* spec : m.split.skipped) {
    out.push_back(absl::StrCat("policy family ", spec->family_name, " not used: it needs ",
                               spec->evidence_needed));
  }
  if (m.upper_family_count > 1) {
    out.push_back(absl::StrCat("risk upper bound is the tightest of ", m.upper_family_count,
                               " families, each at failure probability ",
                               Num(m.split.per_family), " (union bound)"));
  }
  out.push_back(absl::StrCat("true error is at most ", Num(upper), " (", m.upper_family_name,
                             ", empirical ", Num(m.risk_certificate.empirical_risk),
                             ", failure probability ", Num(m.split.per_family), "), ",
                             f.risk_promote ? "at or below" : "above", " the threshold ",
                             Num(m.max_risk)));
  if (m.risk_certificate.vacuous) {
    out.push_back(absl::StrCat("the risk upper bound ", Num(upper),
                               " is vacuous (no better than 1 or the baseline)"));
  }
  if (m.risk_lower_bound.has_value()) {
    out.push_back(absl::StrCat(
        "true error is at least ", Num(*m.risk_lower_bound),
        m.sequential ? " (anytime-valid, holdout-anytime, on " : " (Clopper-Pearson on ",
        m.holdout->error_count, " errors in ", m.holdout->sample_count,
        " hold-out samples, failure probability ", Num(m.split.risk_lower), "), ",
        f.risk_reject ? "above" : "not above", " the threshold ", Num(m.max_risk)));
  } else {
    out.push_back(
        "no hold-out counts: no lower bound on the true error, so the risk test cannot reject");
  }
  if (f.risk_promote && f.risk_reject) {
    out.push_back(absl::StrCat(
        "the risk upper bound ", Num(upper), " (", m.upper_family_name,
        ") lies below the hold-out lower bound ", Num(*m.risk_lower_bound),
        ": the evidence contradicts itself (a bound's assumptions may be violated)"));
  }
  if (!m.slices.empty()) {
    out.push_back(absl::StrCat(
        m.slices.size(), " slices share failure probability ", Num(m.split.slices_total), ": ",
        SliceShareRuleText(m.slice_rule, m.slice_weighted), "; outcomes: ",
        SlicesWith(m, SliceOutcome::kClears).size(), " CLEARS, ",
        SlicesWith(m, SliceOutcome::kExceeds).size(), " EXCEEDS, ",
        SlicesWith(m, SliceOutcome::kUndecided).size(),
        " UNDECIDED (each slice's finding is in the slices list)"));
  }
  if (!f.has_champion) return out;
  if (!m.tolerance_given) {
    out.push_back(
        "no max_regression in the policy: the candidate must not be worse than the champion "
        "(tolerance 0)");
  }
  if (m.mcnemar_p_value.has_value()) {
    out.push_back(absl::StrCat(
        "exact one-sided McNemar p-value ", Num(*m.mcnemar_p_value),
        ": if the two models were equally good, a split of their disagreements at least this "
        "favourable to the candidate would occur with probability ",
        Num(*m.mcnemar_p_value),
        "; small values are evidence that the candidate is better, it is not the probability "
        "that it is better (McNemar 1947; informational: no verdict rule uses it and it "
        "spends no failure probability)"));
  }
  if (!m.paired) {
    out.push_back(
        "champion and candidate were scored on different hold-out sets: this comparison is "
        "weaker than a paired one on a shared set");
  }
  out.push_back(absl::StrCat(
      "candidate error minus champion '", *m.champion_id, "' error lies in [",
      Num(*m.difference_lower), ", ", Num(*m.difference_upper), "] (", m.comparison_how,
      "; failure probability ", Num(m.split.difference_upper + m.split.difference_lower),
      "); tolerated regression ", Num(m.tolerance)));
  return out;
}

}  // namespace riskbound::core::gate_internal
