#include "service/core/gate.h"

#include <algorithm>
#include <cfloat>
#include <cmath>
#include <exception>
#include <functional>
#include <set>


#include "absl/status/status.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "absl/strings/str_join.h"
#include "service/core/certify.h"
#include "service/core/families.h"
#include "service/core/field_violation.h"
#include "service/core/holdout.h"
#include "service/core/numeric.h"
#include "service/core/plan.h"
#include "service/core/work_budget.h"

namespace riskbound::core {
namespace {

// Below this the delta split (down to delta/8 per binomial limit, /K per
// family) would leave the normal doubles.
constexpr double kMinGateDelta = 1e-300;

// CPU time one REJECT plan may take (ordinary plans take well under a
// millisecond; only rates within a hair of the threshold come near it).
constexpr double kRejectionPlanCpuSeconds = 0.15;
// The same for the paired champion-comparison plan (two limits per size).
constexpr double kPairedPlanCpuSeconds = 0.05;

// Shares of one family in a K-way split are shrunk by this factor so that K
// rounded shares never add up to more than the share they split.
constexpr double kSplitShrink = 1.0 - 8.0 * DBL_EPSILON;

std::string Num(double v) { return absl::StrFormat("%.6g", v); }

// How policy.failure_probability is split; depends on the policy and the kinds of evidence
// present, never on their values (see gate.h).
struct Split {
  // The policy families that apply, in policy order.
  std::vector<const FamilySpec*> families;
  // Policy families that do not apply to this evidence.
  std::vector<const FamilySpec*> skipped;
  // Delta of each family's upper bound (risk-upper share / K).
  double per_family = 0.0;
  // 0 when there is no hold-out evidence (no lower bound).
  double risk_lower = 0.0;
  double difference_upper = 0.0;
  double difference_lower = 0.0;
};

// REQUIRES: the policy families are known and distinct (validated).
Split MakeSplit(const GatePolicy& policy, const Evidence& evidence, bool with_champion) {
  Split s;
  std::vector<Family> listed;
  for (const std::optional<Family>& f : policy.allowed_families) {
    if (f.has_value()) listed.push_back(*f);
  }
  if (policy.allowed_families.empty()) listed.push_back(Family::kHoldoutExactBinomial);
  for (Family f : listed) {
    const FamilySpec* spec = FindFamily(f);
    if (spec == nullptr) continue;
    (spec->applies(evidence) ? s.families : s.skipped).push_back(spec);
  }
  const double risk = with_champion ? policy.failure_probability / 2.0 : policy.failure_probability;
  double upper = risk;
  if (evidence.holdout.has_value()) {
    upper = risk / 2.0;
    s.risk_lower = risk / 2.0;
  }
  const std::size_t k = std::max<std::size_t>(s.families.size(), 1);
  s.per_family = k == 1 ? upper : upper / static_cast<double>(k) * kSplitShrink;
  if (with_champion) {
    s.difference_upper = policy.failure_probability / 4.0;
    s.difference_lower = policy.failure_probability / 4.0;
  }
  return s;
}

void CheckPaired(const PairedCounts& p, const std::optional<SampleCounts>& holdout,
                 std::vector<FieldViolation>* out) {
  const std::string prefix = "champion.paired";
  if (p.sample_count == 0) {
    out->push_back({prefix + ".sample_count", "must be at least 1"});
    return;
  }
  if (p.sample_count > kMaxSampleCount) {
    out->push_back(
        {prefix + ".sample_count",
         absl::StrCat("must be at most 2^53 = ", kMaxSampleCount, ", got ", p.sample_count)});
    return;
  }
  // Each term <= 2^53 here or it is reported, so the sum cannot overflow.
  const struct {
    const char* field;
    std::uint64_t value;
  } parts[] = {{"both_wrong_count", p.both_wrong_count},
               {"only_champion_wrong_count", p.only_champion_wrong_count},
               {"only_challenger_wrong_count", p.only_challenger_wrong_count}};
  bool each_ok = true;
  for (const auto& part : parts) {
    if (part.value > p.sample_count) {
      out->push_back({absl::StrCat(prefix, ".", part.field),
                      absl::StrCat(part.value, " exceeds the ", p.sample_count,
                                   " samples it was counted on")});
      each_ok = false;
    }
  }
  if (!each_ok) return;
  const std::uint64_t sum =
      p.both_wrong_count + p.only_champion_wrong_count + p.only_challenger_wrong_count;
  if (sum > p.sample_count) {
    out->push_back(
        {prefix + ".sample_count",
         absl::StrCat("both_wrong_count + only_champion_wrong_count + "
                      "only_challenger_wrong_count = ",
                      sum, " exceeds the ", p.sample_count, " samples they were counted on")});
    return;
  }
  if (!holdout.has_value()) {
    out->push_back({"candidate.evidence.holdout",
                    "a paired champion comparison needs the candidate's hold-out counts "
                    "on the same hold-out set"});
    return;
  }
  if (holdout->sample_count != p.sample_count) {
    out->push_back(
        {prefix + ".sample_count",
         absl::StrCat(p.sample_count, " differs from candidate.evidence.holdout.sample_count ",
                      holdout->sample_count,
                      ": paired counts must come from the candidate's hold-out "
                      "set")});
  }
  const std::uint64_t candidate_errors = p.both_wrong_count + p.only_challenger_wrong_count;
  if (holdout->error_count != candidate_errors) {
    out->push_back(
        {prefix + ".only_challenger_wrong_count",
         absl::StrCat("both_wrong_count + only_challenger_wrong_count = ", candidate_errors,
                      " must equal candidate.evidence.holdout.error_count ",
                      holdout->error_count)});
  }
}

// Returns OK or INVALID_ARGUMENT naming every bad field (see DecideGate).
// Leaves in *evidence the candidate's evidence with its capacity resolved.
absl::Status Validate(const GatePolicy& policy, const GateCandidate& candidate,
                      const std::optional<ChampionComparison>& champion, Evidence* evidence) {
  std::vector<FieldViolation> v;
  CheckProbabilityOpen("policy.max_risk", policy.max_risk, &v);
  if (CheckProbabilityOpen("policy.failure_probability", policy.failure_probability, &v) &&
      policy.failure_probability < kMinGateDelta) {
    v.push_back(
        {"policy.failure_probability", absl::StrCat("must be at least ", Num(kMinGateDelta),
                                                    " to be split between the gate's tests, got ",
                                                    Num(policy.failure_probability))});
  }
  if (policy.plan_pass_probability.has_value()) {
    CheckProbabilityOpen("policy.plan_pass_probability", *policy.plan_pass_probability, &v);
  }
  if (policy.max_regression.has_value()) {
    const double t = *policy.max_regression;
    if (!std::isfinite(t) || t < -1.0 || t > 1.0) {
      v.push_back({"policy.max_regression",
                   absl::StrCat("must be a difference of error rates in [-1, 1], got ",
                                std::isnan(t) ? std::string("NaN") : Num(t))});
    }
  }
  std::set<Family> seen;
  bool families_ok = true;
  for (std::size_t i = 0; i < policy.allowed_families.size(); ++i) {
    const std::string field = absl::StrCat("policy.allowed_families[", i, "]");
    const std::optional<Family>& family = policy.allowed_families[i];
    const FamilySpec* spec = family.has_value() ? FindFamily(*family) : nullptr;
    if (spec == nullptr) {
      v.push_back({field,
                   "unknown bound family (unset, or a value this server does not know; "
                   "ListFamilies lists them)"});
      families_ok = false;
    } else if (!seen.insert(spec->family).second) {
      v.push_back({field, absl::StrCat(spec->family_name, " is listed twice")});
      families_ok = false;
    } else if (spec->bounds_expected_loss) {
      // Their certificates bound an expected loss in the loss's own units;
      // policy.max_risk is an error rate, so the two cannot be compared.
      v.push_back({field, absl::StrCat(spec->family_name,
                                       " bounds an expected loss in its own units, not the "
                                       "error rate that policy.max_risk limits")});
      families_ok = false;
    }
  }

  if (candidate.id.empty()) v.push_back({"candidate.id", "must name the candidate model"});
  *evidence = candidate.evidence;
  const bool evidence_ok = PrepareEvidence(evidence, "candidate.evidence", &v);
  if (evidence_ok && families_ok) {
    const Split split = MakeSplit(policy, *evidence, champion.has_value());
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

// Ceil / floor of count * n / samples without overflow (count <= samples).
std::uint64_t ScaledCeil(std::uint64_t count, std::uint64_t samples, std::uint64_t n) {
  const unsigned __int128 num = static_cast<unsigned __int128>(count) * n;
  return static_cast<std::uint64_t>((num + samples - 1) / samples);
}
std::uint64_t ScaledFloor(std::uint64_t count, std::uint64_t samples, std::uint64_t n) {
  return static_cast<std::uint64_t>(static_cast<unsigned __int128>(count) * n / samples);
}

// Smallest n in [lo, kMaxSampleCount] with ok(n), for a predicate that is
// (roughly) monotone: doubles a bracket from lo first, so the cost scales with
// the answer, not with 2^53 (bound evaluations at huge n are slow).
// Once `stop` stops, the predicate answers true without computing, so the
// search ends in a few cheap steps, and the stop's status is returned.
// With a `budget`, a spent budget does the same and returns
// RESOURCE_EXHAUSTED.
absl::StatusOr<std::uint64_t> SmallestFrom(std::uint64_t lo,
                                           const std::function<bool(std::uint64_t)>& ok,
                                           const StopToken& stop,
                                           WorkBudget* budget = nullptr) {
  bool stopped = false;
  bool exhausted = false;
  const std::function<bool(std::uint64_t)> checked = [&](std::uint64_t n) {
    if (stopped || stop.StopRequested()) {
      stopped = true;
      return true;
    }
    if (exhausted || (budget != nullptr && budget->Spent())) {
      exhausted = true;
      return true;
    }
    return ok(n);
  };
  lo = std::max<std::uint64_t>(lo, 1);
  std::uint64_t hi = std::max<std::uint64_t>(2 * lo, 64);
  while (true) {
    hi = std::min(hi, kMaxSampleCount);
    if (checked(hi)) {
      absl::StatusOr<std::uint64_t> n = SmallestSatisfying(lo, hi, checked);
      if (stopped) return stop.Status();
      if (exhausted) return absl::ResourceExhaustedError("over the plan's work budget");
      return n;
    }
    if (stopped) return stop.Status();
    if (exhausted) return absl::ResourceExhaustedError("over the plan's work budget");
    if (hi == kMaxSampleCount) {
      return absl::NotFoundError("no sample size up to 2^53 settles it");
    }
    lo = hi + 1;
    hi *= 2;
  }
}

// P(Bin(n, p) >= k), summed in log space (numeric.h); where the sum cannot
// be settled, a lower bound (the plan only grows).
double UpperTail(std::uint64_t n, std::uint64_t k, double p) {
  return BinomialUpperTailLowerBound(n, k, p, nullptr);
}

// The mirror image of the pass-probability plan (plan.h) for a REJECT: smallest total n (found by
// exponential search and bisection) with P(Bin(n, p) >= k_min(n)) >= pass,
// where k_min(n) is the fewest errors whose Clopper-Pearson lower limit at
// `delta` exceeds epsilon. NOT_FOUND when no n up to 2^53 does it.
// The rate q > p with kl(q || p) = c (Bernoulli kl, increasing in q above
// p), by bisection to 1e-12, rounded up; 1 when even q = 1 falls short.
double KlRateAbove(double p, double c) {
  if (BernoulliKl(1.0, p) <= c) return 1.0;
  double lo = p;
  double hi = 1.0;
  while (hi - lo > 1e-12 * hi) {
    const double mid = lo + (hi - lo) / 2.0;
    if (mid <= lo || mid >= hi) break;
    (BernoulliKl(mid, p) <= c ? lo : hi) = mid;
  }
  return hi;
}

// Each "lower limit > epsilon" is decided from one binomial tail where it
// can be (numeric.h LowerLimitAbove); k_min > epsilon n, so its search
// starts there.
absl::StatusOr<std::uint64_t> PlanRejection(double epsilon, double p, double delta,
                                            double pass, std::uint64_t held,
                                            const StopToken& stop) {
  // At a true rate p <= epsilon the lower limit exceeds epsilon (so exceeds
  // p) with probability at most delta, whatever n (Clopper & Pearson 1934):
  // a pass probability above delta is out of reach, no search needed.
  if (p <= epsilon && pass > delta) {
    return absl::NotFoundError("no sample size up to 2^53 settles it");
  }
  // Work budget: each decision costs microseconds, up to about half a
  // millisecond where a limit must be computed (rates within a hair of
  // epsilon at huge n, where thousands are needed); past the budget the plan
  // is given up (and every later decision answers at once, so the searches
  // wind down).
  WorkBudget budget(kRejectionPlanCpuSeconds);
  bool exhausted = false;
  const auto above = [&](std::uint64_t n, std::uint64_t k) {
    if (exhausted || budget.Spent()) {
      exhausted = true;
      return true;
    }
    return LowerLimitAbove(n, k, delta, epsilon);
  };
  auto ok = [&](std::uint64_t n) {
    if (!above(n, n)) return false;
    const double nd = static_cast<double>(n);
    const double floor_k = std::floor(epsilon * nd);
    const std::uint64_t from = std::min<std::uint64_t>(n, static_cast<std::uint64_t>(floor_k));
    // Upper end of k_min's bracket from Chernoff (1952): the Clopper-Pearson
    // lower limit is at least the kl limit, which exceeds epsilon once
    // kl(k/n || epsilon) > ln(1/delta)/n.
    std::uint64_t to = n;
    const double q = KlRateAbove(epsilon, -std::log(delta) / nd);
    if (q < 1.0) {
      const double k_kl = std::ceil(q * nd) + 1.0;
      if (k_kl < nd && above(n, static_cast<std::uint64_t>(k_kl))) {
        to = static_cast<std::uint64_t>(k_kl);
      }
    }
    absl::StatusOr<std::uint64_t> k_min = to <= from ? absl::StatusOr<std::uint64_t>(to)
                                                     : SmallestSatisfying(
        from, to, [&](std::uint64_t k) { return above(n, k); });
    return k_min.ok() && (exhausted || UpperTail(n, *k_min, p) >= pass);
  };
  absl::StatusOr<std::uint64_t> n = SmallestFrom(held, ok, stop);
  if (exhausted && n.ok()) {
    return absl::ResourceExhaustedError(
        "the rate is too close to the threshold for a plan within the per-call work budget");
  }
  return n;
}

// Smallest total n (anticipated disagreement rates held fixed) at which the
// paired difference limits settle the comparison against tolerance t.
absl::StatusOr<std::uint64_t> PlanPairedComparison(const PairedCounts& p, double t,
                                                   double delta_upper,
                                                   double delta_lower,
                                                   const StopToken& stop) {
  const double rate_b =
      static_cast<double>(p.only_challenger_wrong_count) / static_cast<double>(p.sample_count);
  const double rate_c =
      static_cast<double>(p.only_champion_wrong_count) / static_cast<double>(p.sample_count);
  const double observed = rate_b - rate_c;
  std::function<bool(std::uint64_t)> ok;
  if (observed < t) {
    // Toward PROMOTE: round b up and c down (the anticipated counts that make
    // the upper limit largest).
    ok = [&](std::uint64_t n) {
      PairedCounts q{0, ScaledFloor(p.only_champion_wrong_count, p.sample_count, n),
                     ScaledCeil(p.only_challenger_wrong_count, p.sample_count, n), n};
      return PairedDifferenceUpper(q, delta_upper).value <= t;
    };
  } else if (observed > t) {
    ok = [&](std::uint64_t n) {
      PairedCounts q{0, ScaledCeil(p.only_champion_wrong_count, p.sample_count, n),
                     ScaledFloor(p.only_challenger_wrong_count, p.sample_count, n), n};
      return PairedDifferenceLower(q, delta_lower).value > t;
    };
  } else {
    return absl::NotFoundError("the observed difference equals the tolerance");
  }
  WorkBudget budget(kPairedPlanCpuSeconds);
  return SmallestFrom(p.sample_count, ok, stop, &budget);
}

}  // namespace

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
  Evidence resolved;
  if (absl::Status s = Validate(policy, candidate, champion, &resolved); !s.ok()) return s;
  if (stop.StopRequested()) return stop.Status();

  const Evidence& evidence = resolved;
  const double pass = policy.plan_pass_probability.value_or(kDefaultPlanPassProbability);
  const Split split = MakeSplit(policy, evidence, champion.has_value());
  const double epsilon = policy.max_risk;
  GateDecision d;
  std::vector<std::string> details;

  // Risk upper bound: the tightest applicable policy family at its share.
  std::size_t tightest = 0;
  std::vector<Certificate> certs;
  for (const FamilySpec* spec : split.families) {
    Certificate c = spec->compute(evidence, split.per_family);
    if (evidence.baseline_error_rate.has_value() &&
        c.risk_upper_bound >= *evidence.baseline_error_rate) {
      c.vacuous = true;
    }
    d.delta_ledger.push_back(
        DeltaSpend{absl::StrCat("risk upper bound: ", spec->family_name), split.per_family});
    d.families_used.push_back(spec->family);
    certs.push_back(std::move(c));
    if (certs.back().risk_upper_bound < certs[tightest].risk_upper_bound)
      tightest = certs.size() - 1;
  }
  d.risk_certificate = certs[tightest];
  d.risk_certificate.risk_lower_bound.reset();
  const double upper = d.risk_certificate.risk_upper_bound;
  const std::string upper_slug(split.families[tightest]->family_name);
  const bool risk_promote = upper <= epsilon;
  for (const FamilySpec* spec : split.skipped) {
    details.push_back(absl::StrCat("policy family ", spec->family_name, " not used: it needs ",
                                   spec->evidence_needed));
  }
  if (certs.size() > 1) {
    details.push_back(absl::StrCat("risk upper bound is the tightest of ", certs.size(),
                                   " families, each at failure probability ",
                                   Num(split.per_family), " (union bound)"));
  }
  details.push_back(absl::StrCat(
      "true error is at most ", Num(upper), " (", upper_slug, ", empirical ",
      Num(d.risk_certificate.empirical_risk), ", failure probability ",
      Num(split.per_family), "), ", risk_promote ? "at or below" : "above",
      " the threshold ", Num(epsilon)));
  if (d.risk_certificate.vacuous) {
    details.push_back(absl::StrCat("the risk upper bound ", Num(upper),
                                   " is vacuous (no better than 1 or the baseline)"));
  }

  // Risk lower bound: Clopper-Pearson on the hold-out counts.
  bool risk_reject = false;
  if (evidence.holdout.has_value()) {
    const Certificate low = HoldoutExactBinomial(*evidence.holdout, split.risk_lower);
    d.risk_lower_bound = low.risk_lower_bound.value_or(0.0);
    d.delta_ledger.push_back(
        DeltaSpend{"risk lower bound: holdout-binomial (Clopper-Pearson)", split.risk_lower});
    if (std::find(d.families_used.begin(), d.families_used.end(),
                  Family::kHoldoutExactBinomial) == d.families_used.end()) {
      d.families_used.push_back(Family::kHoldoutExactBinomial);
    }
    risk_reject = *d.risk_lower_bound > epsilon;
    details.push_back(
        absl::StrCat("true error is at least ", Num(*d.risk_lower_bound), " (Clopper-Pearson on ",
                     evidence.holdout->error_count, " errors in ", evidence.holdout->sample_count,
                     " hold-out samples, failure probability ", Num(split.risk_lower), "), ",
                     risk_reject ? "above" : "not above", " the threshold ", Num(epsilon)));
  } else {
    details.push_back(
        "no hold-out counts: no lower bound on the true error, so the risk test "
        "cannot reject");
  }
  const bool contradiction = risk_promote && risk_reject;
  if (contradiction) {
    details.push_back(absl::StrCat(
        "the risk upper bound ", Num(upper), " (", upper_slug,
        ") lies below the hold-out lower bound ", Num(*d.risk_lower_bound),
        ": the evidence contradicts itself (a bound's assumptions may be violated)"));
  }

  // Champion comparison.
  const double tolerance = policy.max_regression.value_or(0.0);
  bool cmp_promote = true;
  bool cmp_reject = false;
  std::string cmp_summary;
  if (champion.has_value()) {
    if (!policy.max_regression.has_value()) {
      details.push_back("no max_regression in the policy: the candidate must not be "
                        "worse than the champion (tolerance 0)");
    }
    TailLimit du, dl;
    std::string how;
    if (champion->paired.has_value()) {
      const PairedCounts& p = *champion->paired;
      du = PairedDifferenceUpper(p, split.difference_upper);
      dl = PairedDifferenceLower(p, split.difference_lower);
      how = absl::StrCat("paired Clopper-Pearson pair on ", p.sample_count,
                         " shared hold-out samples: only the candidate wrong on ",
                         p.only_challenger_wrong_count, ", only the champion wrong on ",
                         p.only_champion_wrong_count);
      d.mcnemar_p_value =
          McNemarExactOneSidedPValue(p.only_challenger_wrong_count, p.only_champion_wrong_count);
      details.push_back(absl::StrCat(
          "exact one-sided McNemar p-value ", Num(*d.mcnemar_p_value),
          " that the candidate is better than the champion (informational, not used by "
          "the verdict, spends no failure probability)"));
      d.delta_ledger.push_back(DeltaSpend{"difference upper bound: paired Clopper-Pearson pair",
                                          split.difference_upper});
      d.delta_ledger.push_back(DeltaSpend{"difference lower bound: paired Clopper-Pearson pair",
                                          split.difference_lower});
    } else {
      const SampleCounts& ch = *champion->champion_holdout;
      du = UnpairedDifferenceUpper(*evidence.holdout, ch, split.difference_upper);
      dl = UnpairedDifferenceLower(*evidence.holdout, ch, split.difference_lower);
      how = absl::StrCat("separate Clopper-Pearson limits: candidate ",
                         evidence.holdout->error_count, "/", evidence.holdout->sample_count,
                         ", champion ", ch.error_count, "/", ch.sample_count);
      details.push_back(
          "champion and candidate were scored on different hold-out sets: this "
          "comparison is weaker than a paired one on a shared set");
      d.delta_ledger.push_back(DeltaSpend{"difference upper bound: unpaired Clopper-Pearson limits",
                                          split.difference_upper});
      d.delta_ledger.push_back(DeltaSpend{"difference lower bound: unpaired Clopper-Pearson limits",
                                          split.difference_lower});
    }
    d.difference_upper_bound = du.value;
    d.difference_lower_bound = dl.value;
    cmp_promote = du.value <= tolerance;
    cmp_reject = dl.value > tolerance;
    details.push_back(absl::StrCat(
        "candidate error minus champion '", champion->champion_id, "' error lies in [",
        Num(dl.value), ", ", Num(du.value), "] (", how, "; failure probability ",
        Num(split.difference_upper + split.difference_lower), "); tolerated regression ",
        Num(tolerance)));
    if (cmp_reject) {
      cmp_summary = absl::StrCat("the candidate is worse than champion '",
                                 champion->champion_id, "' by at least ", Num(dl.value),
                                 ", beyond the tolerated ", Num(tolerance));
    } else if (cmp_promote) {
      cmp_summary = absl::StrCat("the candidate is at most ", Num(du.value),
                                 " worse than champion '", champion->champion_id,
                                 "' (tolerated ", Num(tolerance), ")");
    } else {
      cmp_summary = absl::StrCat("the comparison with champion '", champion->champion_id,
                                 "' is not settled: the difference may be up to ",
                                 Num(du.value), " against a tolerated ", Num(tolerance));
    }
  }

  const std::uint64_t held = evidence.holdout.has_value() ? evidence.holdout->sample_count : 0;
  const bool below_min = held < policy.min_holdout_sample_count;
  std::string summary;
  if (below_min) {
    d.verdict = Verdict::kHold;
    summary = absl::StrCat("HOLD: ", held, " hold-out samples, fewer than the policy's ",
                           "minimum of ", policy.min_holdout_sample_count,
                           "; more labelled data is needed before a verdict");
    if (risk_reject || cmp_reject) {
      absl::StrAppend(&summary, " (the bounds alone would already REJECT)");
    } else if (risk_promote && cmp_promote) {
      absl::StrAppend(&summary, " (the bounds alone would PROMOTE)");
    }
  } else if (risk_reject || cmp_reject) {
    d.verdict = Verdict::kReject;
    std::vector<std::string> why;
    if (risk_reject) {
      why.push_back(absl::StrCat("the true error is above the threshold ", Num(epsilon),
                                 " with confidence (lower bound ",
                                 Num(*d.risk_lower_bound), ")"));
    }
    if (cmp_reject) why.push_back(cmp_summary);
    summary = absl::StrCat("REJECT: ", absl::StrJoin(why, "; and "),
                           "; more data is not expected to change this");
  } else if (risk_promote && cmp_promote) {
    d.verdict = Verdict::kPromote;
    summary = absl::StrCat("PROMOTE: the true error is at most ", Num(upper),
                           ", at or below the threshold ", Num(epsilon));
    if (champion.has_value()) absl::StrAppend(&summary, "; and ", cmp_summary);
  } else {
    d.verdict = Verdict::kHold;
    std::vector<std::string> why;
    if (!risk_promote) {
      why.push_back(absl::StrCat("the true error may be up to ", Num(upper),
                                 ", above the threshold ", Num(epsilon),
                                 ", but is not shown to exceed it"));
    }
    if (!cmp_promote) why.push_back(cmp_summary);
    summary = absl::StrCat("HOLD: ", absl::StrJoin(why, "; and "));
  }

  // How many more hold-out samples would settle a HOLD.
  if (stop.StopRequested()) return stop.Status();
  if (d.verdict == Verdict::kHold) {
    std::uint64_t need = 0;
    bool plannable = true;
    if (below_min) need = policy.min_holdout_sample_count - held;
    const bool risk_open = !risk_promote && !risk_reject;
    if (risk_open) {
      // The split a future run with hold-out counts will use.
      Evidence future = evidence;
      if (!future.holdout.has_value()) future.holdout = SampleCounts{0, 1};
      const Split next = MakeSplit(policy, future, champion.has_value());
      const bool has_binomial =
          std::any_of(next.families.begin(), next.families.end(), [](const FamilySpec* s) {
            return s->family == Family::kHoldoutExactBinomial;
          });
      const double rate = evidence.holdout.has_value() ? EmpiricalRate(*evidence.holdout)
                                                       : d.risk_certificate.empirical_risk;
      const std::string rate_words =
          evidence.holdout.has_value() ? "the observed hold-out error rate"
                                       : "the training error rate (no hold-out counts yet)";
      if (!has_binomial) {
        plannable = false;
        details.push_back(
            "no hold-out plan: the policy does not allow the hold-out exact binomial bound");
      } else if (rate < epsilon) {
        HoldoutPlanRequest req;
        req.target_risk = epsilon;
        req.expected_risk = rate;
        req.failure_probability = next.per_family;
        req.pass_probability = pass;
        req.held_sample_count = held;
        absl::StatusOr<HoldoutPlan> plan = PlanHoldout(req, stop);
        if (stop.StopRequested()) return stop.Status();
        if (plan.ok() && plan->reachable) {
          need = std::max(need, plan->additional_sample_count);
          details.push_back(absl::StrCat("if the error rate stays near ", rate_words, " ",
                                         Num(rate), ", about ", plan->additional_sample_count,
                                         " more labelled hold-out samples (", plan->sample_count,
                                         " in all) give a PROMOTE on risk with probability ",
                                         Num(plan->pass_probability_at_plan)));
        } else {
          plannable = false;
          details.push_back(absl::StrCat(
              "no hold-out plan: ",
              plan.ok() ? plan->reason : std::string(plan.status().message())));
        }
      } else {
        absl::StatusOr<std::uint64_t> n =
            PlanRejection(epsilon, rate, next.risk_lower, pass, held, stop);
        if (stop.StopRequested()) return stop.Status();
        if (n.ok()) {
          need = std::max(need, *n - std::min(*n, held));
          details.push_back(
              absl::StrCat(rate_words, " ", Num(rate), " is at or above the threshold: about ",
                           *n - std::min(*n, held), " more labelled hold-out samples (", *n,
                           " in all) would show it with probability ", Num(pass),
                           " if the rate stays there (a REJECT)"));
        } else if (n.status().code() == absl::StatusCode::kResourceExhausted) {
          plannable = false;
          details.push_back(absl::StrCat("no REJECT plan: ", rate_words, " ", Num(rate),
                                         " is so close to the threshold that a plan would "
                                         "take more than the per-call work budget"));
        } else {
          plannable = false;
          details.push_back(absl::StrCat(rate_words, " ", Num(rate),
                                         " is at the threshold: no hold-out size up to "
                                         "2^53 is expected to settle the risk test"));
        }
      }
    }
    const bool cmp_open = champion.has_value() && !cmp_promote && !cmp_reject;
    if (cmp_open) {
      if (champion->paired.has_value()) {
        absl::StatusOr<std::uint64_t> n =
            PlanPairedComparison(*champion->paired, tolerance, split.difference_upper,
                                 split.difference_lower, stop);
        if (stop.StopRequested()) return stop.Status();
        if (n.ok()) {
          need = std::max(need, *n - std::min(*n, held));
          details.push_back(absl::StrCat(
              "at the observed disagreement rates about ", *n - std::min(*n, held),
              " more shared hold-out samples (", *n,
              " in all) settle the champion comparison (anticipated-rate plan, about "
              "even odds)"));
        } else if (n.status().code() == absl::StatusCode::kResourceExhausted) {
          plannable = false;
          details.push_back(
              "no plan for the champion comparison: the observed difference is so close "
              "to the tolerated regression that a plan would take more than the per-call "
              "work budget");
        } else {
          plannable = false;
          details.push_back(
              "the observed difference equals the tolerated regression: no number of "
              "samples is expected to settle the champion comparison");
        }
      } else {
        plannable = false;
        details.push_back(
            "no plan for the unpaired champion comparison: score both models on one "
            "shared hold-out set for a paired, tighter comparison");
      }
    }
    if (plannable && need > 0) d.additional_sample_count = need;
  }

  d.reasons.push_back(std::move(summary));
  for (std::string& s : details) d.reasons.push_back(std::move(s));

  double spent = 0.0;
  for (const DeltaSpend& entry : d.delta_ledger) spent += entry.failure_probability;
  d.spent_failure_probability = spent;
  d.cautions = GateCautions();
  if (!(spent <= policy.failure_probability)) {
    return absl::InternalError(absl::StrCat("delta ledger sums to ", Num(spent),
                                            ", more than the policy's ",
                                            Num(policy.failure_probability)));
  }
  return d;
}

}  // namespace riskbound::core
