// The promotion gate's entry point: validation, the failure-probability
// split, the bounds, and DecideGate, which puts the parts of
// gate_internal.h together (decision table, reasons, HOLD planner).
#include "service/core/gate.h"

#include <algorithm>
#include <cmath>
#include <map>
#include <set>

#include "absl/status/status.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_join.h"
#include "service/core/anytime.h"
#include "service/core/certify.h"
#include "service/core/delta_split.h"
#include "service/core/families.h"
#include "service/core/field_violation.h"
#include "service/core/gate_internal.h"
#include "service/core/holdout.h"
#include "service/core/limits.h"
#include "service/core/paired.h"
#include "service/core/slices.h"

namespace riskbound::core {

namespace gate_internal {

Split MakeSplit(const GatePolicy& policy, const Evidence& evidence, bool with_champion) {
  Split s;
  std::vector<Family> listed;
  for (const std::optional<Family>& f : policy.allowed_families) {
    if (f.has_value()) listed.push_back(*f);
  }
  if (policy.allowed_families.empty()) {
    listed.push_back(policy.sequential ? Family::kHoldoutAnytime : Family::kHoldoutExactBinomial);
  }
  for (Family f : listed) {
    const FamilySpec* spec = FindFamily(f);
    if (spec == nullptr) continue;
    (spec->applies(evidence) ? s.families : s.skipped).push_back(spec);
  }
  // Equal parts: risk, the champion comparison (when given), the slices
  // (when given). Halves are exact; a third is rounded down (delta_split.h).
  const bool with_slices = !evidence.slices.empty();
  const std::size_t parts = 1 + (with_champion ? 1 : 0) + (with_slices ? 1 : 0);
  const double part = EqualShare(policy.failure_probability, parts);
  const double risk = part;
  double upper = risk;
  if (evidence.holdout.has_value()) {
    upper = risk / 2.0;
    s.risk_lower = risk / 2.0;
  }
  const std::size_t k = std::max<std::size_t>(s.families.size(), 1);
  // Halves and quarters of a double >= 1e-300 are exact; a K-way share is
  // rounded down (delta_split.h), so the ledger's exact sum is <= delta.
  s.per_family = EqualShare(upper, k);
  if (with_champion) {
    s.difference_upper = part / 2.0;
    s.difference_lower = part / 2.0;
  }
  if (with_slices) s.slices_total = part;
  return s;
}

}  // namespace gate_internal

namespace {

using gate_internal::Measured;
using gate_internal::Num;
using gate_internal::Split;

// Below this the delta split (down to delta/8 per binomial limit, /K per
// family) would leave the normal doubles.
constexpr double kMinGateDelta = 1e-300;

void CheckPaired(const PairedCounts& p, const std::optional<SampleCounts>& holdout,
                 std::vector<FieldViolation>* out) {
  const std::string prefix = "champion.paired";
  // Every check below runs whatever the others found (no early return), so
  // one answer names every bad field; a check that needs another field's
  // value in range runs only when it is.
  bool count_ok = true;
  if (p.sample_count == 0) {
    out->push_back({prefix + ".sample_count", "must be at least 1"});
    count_ok = false;
  } else if (p.sample_count > kMaxSampleCount) {
    out->push_back(
        {prefix + ".sample_count",
         absl::StrCat("must be at most 2^53 = ", kMaxSampleCount, ", got ", p.sample_count)});
    count_ok = false;
  }
  if (!holdout.has_value()) {
    out->push_back({"candidate.evidence.holdout",
                    "a paired champion comparison needs the candidate's hold-out counts "
                    "on the same hold-out set"});
  } else if (count_ok && holdout->sample_count != p.sample_count) {
    out->push_back(
        {prefix + ".sample_count",
         absl::StrCat(p.sample_count, " differs from candidate.evidence.holdout.sample_count ",
                      holdout->sample_count,
                      ": paired counts must come from the candidate's hold-out "
                      "set")});
  }
  // Each term <= 2^53 below or it is reported, so the sums cannot overflow.
  const std::uint64_t limit = count_ok ? p.sample_count : kMaxSampleCount;
  const struct {
    const char* field;
    std::uint64_t value;
  } parts[] = {{"both_wrong_count", p.both_wrong_count},
               {"only_champion_wrong_count", p.only_champion_wrong_count},
               {"only_challenger_wrong_count", p.only_challenger_wrong_count}};
  bool each_ok = true;
  for (const auto& part : parts) {
    if (part.value > limit) {
      out->push_back({absl::StrCat(prefix, ".", part.field),
                      count_ok ? absl::StrCat(part.value, " exceeds the ", p.sample_count,
                                              " samples it was counted on")
                               : absl::StrCat("must be at most 2^53 = ", kMaxSampleCount, ", got ",
                                              part.value)});
      each_ok = false;
    }
  }
  if (!each_ok) return;
  const std::uint64_t sum =
      p.both_wrong_count + p.only_champion_wrong_count + p.only_challenger_wrong_count;
  if (count_ok && sum > p.sample_count) {
    out->push_back(
        {prefix + ".sample_count",
         absl::StrCat("both_wrong_count + only_champion_wrong_count + "
                      "only_challenger_wrong_count = ",
                      sum, " exceeds the ", p.sample_count, " samples they were counted on")});
  }
  const std::uint64_t candidate_errors = p.both_wrong_count + p.only_challenger_wrong_count;
  if (holdout.has_value() && holdout->error_count != candidate_errors) {
    out->push_back(
        {prefix + ".only_challenger_wrong_count",
         absl::StrCat("both_wrong_count + only_challenger_wrong_count = ", candidate_errors,
                      " must equal candidate.evidence.holdout.error_count ",
                      holdout->error_count)});
  }
}

// The slices of the evidence against the policy's slice limits: limits need
// slices, slices need a limit each, and per-slice limits and weights must
// name slices of the evidence.
void CheckSliceLimits(const GatePolicy& policy, const Evidence& evidence,
                      std::vector<FieldViolation>* v) {
  const bool limits = policy.max_slice_risk.has_value() || !policy.slice_max_risks.empty();
  const std::vector<SliceEvidence>& slices = evidence.slices;
  if (slices.empty()) {
    if (limits) {
      v->push_back({"candidate.evidence.slices",
                    "required: the policy sets slice limits (policy.max_slice_risk or "
                    "policy.slice_max_risks), so every slice's hold-out counts are needed"});
    }
    if (!policy.slice_sharing.weights.empty()) {
      v->push_back({"policy.slice_sharing.weights",
                    "go with per-slice counts (candidate.evidence.slices): none given"});
    }
    return;
  }
  if (!limits) {
    v->push_back({"policy.max_slice_risk",
                  "required with per-slice counts (candidate.evidence.slices): set the "
                  "highest tolerated slice error (or policy.slice_max_risks), or leave the "
                  "slices out; a gate never ignores evidence"});
    return;
  }
  if (policy.slice_max_risks.size() > kMaxSlices || slices.size() > kMaxSlices) return;
  std::set<std::string> names;
  for (const SliceEvidence& s : slices) names.insert(s.name);
  std::set<std::string> limited;
  for (std::size_t i = 0; i < policy.slice_max_risks.size(); ++i) {
    const std::string& name = policy.slice_max_risks[i].slice_name;
    if (name.empty()) continue;  // CheckGatePolicy names it
    if (names.count(name) == 0) {
      v->push_back({absl::StrCat("policy.slice_max_risks[", i, "].slice_name"),
                    absl::StrCat("'", name, "' is not a slice of candidate.evidence.slices")});
    }
    limited.insert(name);
  }
  if (!policy.max_slice_risk.has_value()) {
    std::vector<std::string> missing;
    for (const SliceEvidence& s : slices) {
      if (limited.count(s.name) == 0) missing.push_back(absl::StrCat("'", s.name, "'"));
    }
    if (!missing.empty()) {
      const std::size_t shown = std::min<std::size_t>(missing.size(), 5);
      v->push_back(
          {"policy.max_slice_risk",
           absl::StrCat("required: ", missing.size(), " slice(s) have no limit in "
                        "policy.slice_max_risks (",
                        absl::StrJoin(missing.begin(), missing.begin() + shown, ", "),
                        missing.size() > shown ? ", ..." : "", ")")});
    }
  }
  if (policy.slice_sharing.rule.has_value()) {
    CheckSliceSharing(policy.slice_sharing, slices, "policy.slice_sharing", v);
  }
}

// Returns OK or INVALID_ARGUMENT naming every bad field (see DecideGate).
// Leaves in *evidence the candidate's evidence with its capacity resolved.
absl::Status Validate(const GatePolicy& policy, const GateCandidate& candidate,
                      const std::optional<ChampionComparison>& champion, Evidence* evidence) {
  std::vector<FieldViolation> v;
  const bool families_ok = CheckGatePolicy(policy, "policy", &v);

  if (candidate.id.empty()) v.push_back({"candidate.id", "must name the candidate model"});
  *evidence = candidate.evidence;
  const bool evidence_ok = PrepareEvidence(evidence, "candidate.evidence", &v);
  if (evidence_ok && families_ok) {
    const Split split = gate_internal::MakeSplit(policy, *evidence, champion.has_value());
    // Relabel draws from approximate training give heuristic certificates,
    // never a bound a verdict may rest on.
    const bool approximate = evidence->relabel.has_value() &&
                             evidence->relabel->training == RelabelTraining::kApproximate;
    for (const FamilySpec* spec : split.families) {
      const bool reads_relabel = spec->family == Family::kMaximalDiscrepancy ||
                                 (spec->family == Family::kRademacher && !evidence->rademacher);
      if (approximate && reads_relabel) {
        v.push_back({"candidate.evidence.relabel.training",
                     absl::StrCat("approximate training underestimates the capacity, so ",
                                  spec->family_name,
                                  " would give a heuristic estimate, not a bound: a gate "
                                  "verdict never rests on one (retrain exactly, or leave ",
                                  spec->family_name, " out of policy.allowed_families)")});
        break;
      }
    }
    if (split.families.empty()) {
      bool all_holdout = true;
      std::vector<std::string> needs;
      for (const FamilySpec* spec : split.skipped) {
        all_holdout = all_holdout && spec->evidence_needed == "evidence.holdout";
        needs.push_back(absl::StrCat(spec->family_name, " needs ", spec->evidence_needed));
      }
      v.push_back({all_holdout ? "candidate.evidence.holdout" : "candidate.evidence",
                   absl::StrCat("no bound family the policy allows can use this evidence: ",
                                absl::StrJoin(needs, "; "))});
    }
  }

  CheckSliceLimits(policy, *evidence, &v);

  if (champion.has_value()) {
    if (champion->champion_id.empty()) {
      v.push_back({"champion.champion_id", "must name the champion model"});
    }
    if (champion->paired.has_value() == champion->champion_holdout.has_value()) {
      v.push_back({"champion",
                   champion->paired.has_value()
                       ? "give either paired counts (champion.paired) or the champion's "
                         "own hold-out counts (champion.champion_holdout), not both"
                       : "give paired counts on the candidate's hold-out set "
                         "(champion.paired) or the champion's own hold-out counts "
                         "(champion.champion_holdout)"});
    } else if (champion->paired.has_value()) {
      CheckPaired(*champion->paired, candidate.evidence.holdout, &v);
    } else {
      CheckSampleCounts("champion.champion_holdout", *champion->champion_holdout, &v);
      if (!candidate.evidence.holdout.has_value()) {
        v.push_back({"candidate.evidence.holdout",
                     "an unpaired champion comparison needs the candidate's hold-out "
                     "counts"});
      }
    }
  }
  return InvalidFields(v);
}

// Computes every bound of the verdict at its share of the failure
// probability, recording each in the ledger (and the families in
// families_used) of `d`. REQUIRES: validated inputs.
Measured Measure(const GatePolicy& policy, const Evidence& evidence,
                 const std::optional<ChampionComparison>& champion, GateDecision* d) {
  Measured m;
  m.split = gate_internal::MakeSplit(policy, evidence, champion.has_value());
  const Split& split = m.split;
  m.max_risk = policy.max_risk;
  m.min_holdout_sample_count = policy.min_holdout_sample_count;
  m.held = evidence.holdout.has_value() ? evidence.holdout->sample_count : 0;
  m.holdout = evidence.holdout;

  // Risk upper bound: the tightest applicable policy family at its share.
  std::size_t tightest = 0;
  std::vector<Certificate> certs;
  for (const FamilySpec* spec : split.families) {
    Certificate c = spec->compute(evidence, split.per_family);
    if (evidence.baseline_error_rate.has_value() &&
        c.risk_upper_bound >= *evidence.baseline_error_rate) {
      c.vacuous = true;
    }
    d->delta_ledger.push_back(
        DeltaSpend{absl::StrCat("risk upper bound: ", spec->family_name), split.per_family});
    d->families_used.push_back(spec->family);
    certs.push_back(std::move(c));
    if (certs.back().risk_upper_bound < certs[tightest].risk_upper_bound) {
      tightest = certs.size() - 1;
    }
  }
  m.risk_certificate = certs[tightest];
  m.risk_certificate.risk_lower_bound.reset();
  m.upper_family_name = std::string(split.families[tightest]->family_name);
  m.upper_family_count = certs.size();

  // Risk lower bound: Clopper-Pearson on the hold-out counts, or in
  // sequential mode the anytime-valid lower limit (anytime.h).
  m.sequential = policy.sequential;
  if (evidence.holdout.has_value()) {
    const Family lower_family =
        policy.sequential ? Family::kHoldoutAnytime : Family::kHoldoutExactBinomial;
    const Certificate low = policy.sequential
                                ? HoldoutAnytime(*evidence.holdout, split.risk_lower)
                                : HoldoutExactBinomial(*evidence.holdout, split.risk_lower);
    m.risk_lower_bound = low.risk_lower_bound.value_or(0.0);
    d->delta_ledger.push_back(
        DeltaSpend{policy.sequential ? "risk lower bound: holdout-anytime (anytime-valid)"
                                     : "risk lower bound: holdout-binomial (Clopper-Pearson)",
                   split.risk_lower});
    if (std::find(d->families_used.begin(), d->families_used.end(), lower_family) ==
        d->families_used.end()) {
      d->families_used.push_back(lower_family);
    }
  }

  // Champion comparison.
  if (!champion.has_value()) return m;
  m.champion_id = champion->champion_id;
  m.tolerance = policy.max_regression.value_or(0.0);
  m.tolerance_given = policy.max_regression.has_value();
  TailLimit du, dl;
  if (policy.sequential) {
    // Anytime-valid pairs: each one-sided limit at half the share (anytime.h),
    // the same union bound as the fixed-size pairs of paired.h.
    const auto up = [](std::uint64_t n, std::uint64_t k, double delta) {
      return AnytimeUpperLimit(n, k, delta).value;
    };
    const auto low = [](std::uint64_t n, std::uint64_t k, double delta) {
      return AnytimeLowerLimit(n, k, delta).value;
    };
    const double hu = split.difference_upper / 2.0;
    const double hl = split.difference_lower / 2.0;
    std::string kind;
    if (champion->paired.has_value()) {
      const PairedCounts& p = *champion->paired;
      m.paired = true;
      const std::uint64_t n = p.sample_count;
      du.value = up(n, p.only_challenger_wrong_count, hu) - low(n, p.only_champion_wrong_count, hu);
      dl.value = low(n, p.only_challenger_wrong_count, hl) - up(n, p.only_champion_wrong_count, hl);
      m.comparison_how = absl::StrCat("paired anytime-valid pair on ", n,
                                      " shared hold-out samples: only the candidate wrong on ",
                                      p.only_challenger_wrong_count,
                                      ", only the champion wrong on ", p.only_champion_wrong_count);
      m.mcnemar_p_value =
          McNemarExactOneSidedPValue(p.only_challenger_wrong_count, p.only_champion_wrong_count);
      kind = "paired anytime-valid pair";
    } else {
      const SampleCounts& ch = *champion->champion_holdout;
      const SampleCounts& ca = *evidence.holdout;
      du.value = up(ca.sample_count, ca.error_count, hu) - low(ch.sample_count, ch.error_count, hu);
      dl.value = low(ca.sample_count, ca.error_count, hl) - up(ch.sample_count, ch.error_count, hl);
      m.comparison_how =
          absl::StrCat("separate anytime-valid limits: candidate ", ca.error_count, "/",
                       ca.sample_count, ", champion ", ch.error_count, "/", ch.sample_count);
      kind = "unpaired anytime-valid limits";
    }
    d->delta_ledger.push_back(
        DeltaSpend{absl::StrCat("difference upper bound: ", kind), split.difference_upper});
    d->delta_ledger.push_back(
        DeltaSpend{absl::StrCat("difference lower bound: ", kind), split.difference_lower});
  } else if (champion->paired.has_value()) {
    const PairedCounts& p = *champion->paired;
    m.paired = true;
    du = PairedDifferenceUpper(p, split.difference_upper);
    dl = PairedDifferenceLower(p, split.difference_lower);
    m.comparison_how = absl::StrCat("paired Clopper-Pearson pair on ", p.sample_count,
                                    " shared hold-out samples: only the candidate wrong on ",
                                    p.only_challenger_wrong_count, ", only the champion wrong on ",
                                    p.only_champion_wrong_count);
    m.mcnemar_p_value =
        McNemarExactOneSidedPValue(p.only_challenger_wrong_count, p.only_champion_wrong_count);
    d->delta_ledger.push_back(DeltaSpend{"difference upper bound: paired Clopper-Pearson pair",
                                         split.difference_upper});
    d->delta_ledger.push_back(DeltaSpend{"difference lower bound: paired Clopper-Pearson pair",
                                         split.difference_lower});
  } else {
    const SampleCounts& ch = *champion->champion_holdout;
    du = UnpairedDifferenceUpper(*evidence.holdout, ch, split.difference_upper);
    dl = UnpairedDifferenceLower(*evidence.holdout, ch, split.difference_lower);
    m.comparison_how = absl::StrCat("separate Clopper-Pearson limits: candidate ",
                                    evidence.holdout->error_count, "/",
                                    evidence.holdout->sample_count, ", champion ",
                                    ch.error_count, "/", ch.sample_count);
    d->delta_ledger.push_back(DeltaSpend{
        "difference upper bound: unpaired Clopper-Pearson limits", split.difference_upper});
    d->delta_ledger.push_back(DeltaSpend{
        "difference lower bound: unpaired Clopper-Pearson limits", split.difference_lower});
  }
  m.difference_upper = du.value;
  m.difference_lower = dl.value;
  return m;
}

// The slices' bounds at their shares, each with its ledger entry; m.slices
// sorted worst first. REQUIRES: validated inputs.
void MeasureSlices(const GatePolicy& policy, const Evidence& evidence, Measured* m,
                   GateDecision* d) {
  const std::vector<SliceEvidence>& slices = evidence.slices;
  if (slices.empty()) return;
  m->slice_rule = policy.slice_sharing.rule.value_or(SliceShareRule::kBonferroni);
  m->slice_weighted = !policy.slice_sharing.weights.empty();
  const std::vector<double> shares =
      SliceShares(policy.slice_sharing, slices, m->split.slices_total);
  std::map<std::string, double> limit;
  for (const SliceMaxRisk& l : policy.slice_max_risks) limit[l.slice_name] = l.max_risk;
  for (std::size_t i = 0; i < slices.size(); ++i) {
    const SliceEvidence& s = slices[i];
    SliceCheck c;
    c.slice_name = s.name;
    const auto it = limit.find(s.name);
    c.max_risk = it != limit.end() ? it->second : *policy.max_slice_risk;
    c.error_count = s.error_count;
    c.sample_count = s.sample_count;
    c.failure_probability = shares[i];
    // Upper and lower bounds at half the share each: the halves of a
    // two-sided statement (common practice), as for the overall risk.
    const double half = shares[i] / 2.0;
    const Certificate cert =
        policy.sequential ? HoldoutAnytime(s, half) : HoldoutExactBinomial(s, half);
    c.risk_upper_bound = cert.risk_upper_bound;
    c.risk_lower_bound = cert.risk_lower_bound.value_or(0.0);
    c.outcome = c.risk_lower_bound > c.max_risk    ? SliceOutcome::kExceeds
                : c.risk_upper_bound <= c.max_risk ? SliceOutcome::kClears
                                                   : SliceOutcome::kUndecided;
    c.reason = gate_internal::SliceSentence(c, policy.sequential);
    d->delta_ledger.push_back(DeltaSpend{
        absl::StrCat("slice '", s.name, "': upper and lower bounds, ",
                     policy.sequential ? "holdout-anytime (anytime-valid)"
                                       : "holdout-binomial (Clopper-Pearson)",
                     ", half each"),
        shares[i], s.name});
    m->slices.push_back(std::move(c));
  }
  const Family family = policy.sequential ? Family::kHoldoutAnytime : Family::kHoldoutExactBinomial;
  if (std::find(d->families_used.begin(), d->families_used.end(), family) ==
      d->families_used.end()) {
    d->families_used.push_back(family);
  }
  std::sort(m->slices.begin(), m->slices.end(), [](const SliceCheck& a, const SliceCheck& b) {
    const double ma = a.risk_upper_bound - a.max_risk;
    const double mb = b.risk_upper_bound - b.max_risk;
    if (ma != mb) return ma > mb;
    return a.slice_name < b.slice_name;
  });
}

}  // namespace

bool CheckGatePolicy(const GatePolicy& policy, const std::string& prefix,
                     std::vector<FieldViolation>* v) {
  CheckProbabilityOpen(prefix + ".max_risk", policy.max_risk, v);
  if (CheckProbabilityOpen(prefix + ".failure_probability", policy.failure_probability, v) &&
      policy.failure_probability < kMinGateDelta) {
    v->push_back({prefix + ".failure_probability",
                  absl::StrCat("must be at least ", Num(kMinGateDelta),
                               " to be split between the gate's tests, got ",
                               Num(policy.failure_probability))});
  }
  if (policy.plan_pass_probability.has_value()) {
    CheckProbabilityOpen(prefix + ".plan_pass_probability", *policy.plan_pass_probability, v);
  }
  if (policy.max_regression.has_value()) {
    const double t = *policy.max_regression;
    if (!std::isfinite(t) || t < -1.0 || t > 1.0) {
      v->push_back({prefix + ".max_regression",
                    absl::StrCat("must be a difference of error rates in [-1, 1], got ",
                                 std::isnan(t) ? std::string("NaN") : Num(t))});
    }
  }
  if (policy.max_slice_risk.has_value()) {
    CheckProbabilityOpen(prefix + ".max_slice_risk", *policy.max_slice_risk, v);
  }
  if (CheckListSize(prefix + ".slice_max_risks", policy.slice_max_risks.size(), kMaxSlices, v)) {
    std::set<std::string> limited;
    for (std::size_t i = 0; i < policy.slice_max_risks.size(); ++i) {
      const SliceMaxRisk& l = policy.slice_max_risks[i];
      const std::string p = absl::StrCat(prefix, ".slice_max_risks[", i, "]");
      if (l.slice_name.empty()) {
        v->push_back({p + ".slice_name", "must name a slice"});
      } else if (!limited.insert(l.slice_name).second) {
        v->push_back({p + ".slice_name", absl::StrCat("slice '", SanitizeText(l.slice_name, 128),
                                                      "' has a limit already")});
      }
      CheckProbabilityOpen(p + ".max_risk", l.max_risk, v);
    }
  }
  if (!policy.slice_sharing.rule.has_value()) {
    v->push_back({prefix + ".slice_sharing.rule",
                  "unknown share rule (SLICE_SHARE_RULE_BONFERRONI or SLICE_SHARE_RULE_SIDAK)"});
  }
  std::set<Family> seen;
  bool families_ok = true;
  for (std::size_t i = 0; i < policy.allowed_families.size(); ++i) {
    const std::string field = absl::StrCat(prefix, ".allowed_families[", i, "]");
    const std::optional<Family>& family = policy.allowed_families[i];
    const FamilySpec* spec = family.has_value() ? FindFamily(*family) : nullptr;
    if (spec == nullptr) {
      v->push_back({field,
                    "unknown bound family (unset, or a value this server does not know; "
                    "ListFamilies lists them)"});
      families_ok = false;
    } else if (!seen.insert(spec->family).second) {
      v->push_back({field, absl::StrCat(spec->family_name, " is listed twice")});
      families_ok = false;
    } else if (policy.sequential && spec->evidence_needed == "evidence.holdout" &&
               spec->family != Family::kHoldoutAnytime) {
      v->push_back({field, absl::StrCat(spec->family_name,
                                        " holds for one look at one hold-out size, not over "
                                        "re-runs on a growing set: with ",
                                        prefix, ".sequential use holdout-anytime")});
      families_ok = false;
    } else if (spec->bounds_expected_loss) {
      // Their certificates bound an expected loss in the loss's own units;
      // policy.max_risk is an error rate, so the two cannot be compared.
      v->push_back({field, absl::StrCat(spec->family_name,
                                        " bounds an expected loss in its own units, not the "
                                        "error rate that ",
                                        prefix, ".max_risk limits")});
      families_ok = false;
    }
  }

  return families_ok;
}

const char* VerdictName(Verdict verdict) {
  switch (verdict) {
    case Verdict::kPromote:
      return "PROMOTE";
    case Verdict::kHold:
      return "HOLD";
    case Verdict::kReject:
      return "REJECT";
  }
  return "HOLD";
}

const std::vector<std::string>& GateCautions() {
  static const std::vector<std::string>* const kCautions = [] {
    auto* c = new std::vector<std::string>(Cautions());
    c->push_back(
        "A verdict holds only if the policy was fixed before the evidence was seen and the "
        "hold-out set was used for this decision alone: gating again on the same hold-out set "
        "after changing the policy or the model spends the failure probability again.");
    return c;
  }();
  return *kCautions;
}

absl::Status ValidateGate(const GatePolicy& policy, const GateCandidate& candidate,
                          const std::optional<ChampionComparison>& champion) {
  Evidence resolved;
  return Validate(policy, candidate, champion, &resolved);
}

absl::StatusOr<GateDecision> DecideGate(const GatePolicy& policy,
                                        const GateCandidate& candidate,
                                        const std::optional<ChampionComparison>& champion,
                                        const StopToken& stop) {
  Evidence evidence;
  if (absl::Status s = Validate(policy, candidate, champion, &evidence); !s.ok()) return s;
  if (stop.StopRequested()) return stop.Status();

  GateDecision d;
  Measured m = Measure(policy, evidence, champion, &d);
  MeasureSlices(policy, evidence, &m, &d);
  d.risk_certificate = m.risk_certificate;
  d.risk_lower_bound = m.risk_lower_bound;
  d.difference_upper_bound = m.difference_upper;
  d.difference_lower_bound = m.difference_lower;
  d.mcnemar_p_value = m.mcnemar_p_value;

  const gate_internal::Findings f = gate_internal::FindingsOf(m);
  const gate_internal::Decision decision = gate_internal::DecideVerdict(f);
  d.verdict = decision.verdict;
  d.reasons.push_back(gate_internal::SummaryReason(decision, f, m));
  for (std::string& s : gate_internal::BoundReasons(f, m)) d.reasons.push_back(std::move(s));

  // How many more hold-out samples would settle a HOLD.
  if (stop.StopRequested()) return stop.Status();
  if (d.verdict == Verdict::kHold) {
    const double pass = policy.plan_pass_probability.value_or(kDefaultPlanPassProbability);
    absl::StatusOr<gate_internal::HoldPlan> plan =
        gate_internal::PlanHold(policy, evidence, champion, f, m, pass, stop, &m.slices);
    if (!plan.ok()) return plan.status();
    d.additional_sample_count = plan->additional_sample_count;
    for (std::string& s : plan->reasons) d.reasons.push_back(std::move(s));
  }

  // The ledger's exact sum, rounded up, its slice entries combined by their
  // rule (SlicesSpent).
  ExactSum total;
  std::vector<double> slice_shares;
  for (const DeltaSpend& entry : d.delta_ledger) {
    if (entry.slice_name.empty()) {
      total.Add(entry.failure_probability);
    } else {
      slice_shares.push_back(entry.failure_probability);
    }
  }
  if (!slice_shares.empty()) {
    total.Add(SlicesSpent(m.slice_rule, slice_shares, m.split.slices_total));
  }
  const double spent = total.RoundedUp();
  d.spent_failure_probability = spent;
  d.cautions = GateCautions();
  if (!m.slices.empty()) {
    for (const std::string& c : SliceCautions()) d.cautions.push_back(c);
  }
  d.slices = std::move(m.slices);
  if (!(spent <= policy.failure_probability)) {
    return absl::InternalError(absl::StrCat("delta ledger sums to ", Num(spent),
                                            ", more than the policy's ",
                                            Num(policy.failure_probability)));
  }
  return d;
}

}  // namespace riskbound::core
