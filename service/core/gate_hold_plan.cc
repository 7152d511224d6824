// The gate's HOLD planner (gate_internal.h, PlanHold): how many more labelled
// hold-out samples are expected to settle a HOLD, if the observed rates stay
// where they are.
#include <algorithm>
#include <cmath>
#include <functional>
#include <string>

#include "absl/strings/str_cat.h"
#include "service/core/certify.h"
#include "service/core/gate_internal.h"
#include "service/core/numeric.h"
#include "service/core/paired.h"
#include "service/core/plan.h"
#include "service/core/work_budget.h"

namespace riskbound::core::gate_internal {
namespace {

// CPU time one REJECT plan may take (ordinary plans take well under a
// millisecond; only rates within a hair of the threshold come near it).
constexpr double kRejectionPlanCpuSeconds = 0.15;
// The same for the paired champion-comparison plan (two limits per size).
constexpr double kPairedPlanCpuSeconds = 0.05;

// Ceil / floor of count * n / samples without overflow (count <= samples).
std::uint64_t ScaledCeil(std::uint64_t count, std::uint64_t samples, std::uint64_t n) {
  const unsigned __int128 num = static_cast<unsigned __int128>(count) * n;
  return static_cast<std::uint64_t>((num + samples - 1) / samples);
}
std::uint64_t ScaledFloor(std::uint64_t count, std::uint64_t samples, std::uint64_t n) {
  return static_cast<std::uint64_t>(static_cast<unsigned __int128>(count) * n / samples);
}

// Smallest n in [lo, kMaxSampleCount] with ok(n) (numeric.h
// SmallestSatisfying from the guess lo, so the cost scales with the answer,
// never with 2^53: bound evaluations at huge n are slow). Once `stop` stops
// or `budget` (when given) is spent, the predicate answers true without
// computing, so the search ends in a few cheap steps, and the stop's status
// (or RESOURCE_EXHAUSTED) is returned.
absl::StatusOr<std::uint64_t> SmallestSampleCount(std::uint64_t lo,
                                                  const std::function<bool(std::uint64_t)>& ok,
                                                  const StopToken& stop,
                                                  WorkBudget* budget = nullptr) {
  bool stopped = false;
  bool exhausted = false;
  const std::function<bool(std::uint64_t)> watched = [&](std::uint64_t n) {
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
  absl::StatusOr<std::uint64_t> n = SmallestSatisfying(lo, kMaxSampleCount, watched, lo);
  if (stopped) return stop.Status();
  if (exhausted) return absl::ResourceExhaustedError("over the plan's work budget");
  if (!n.ok()) return absl::NotFoundError("no sample size up to 2^53 settles it");
  return n;
}

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

// The mirror image of the hold-out pass-probability plan (plan.h) for a
// REJECT: the smallest total n with P(Bin(n, p) >= k_min(n)) >= pass, where
// k_min(n) is the fewest errors whose Clopper-Pearson lower limit at `delta`
// exceeds epsilon. NOT_FOUND when no n up to 2^53 does it,
// RESOURCE_EXHAUSTED past the work budget. Each "lower limit > epsilon" is
// decided from one binomial tail where it can be (numeric.h
// LowerLimitAbove); k_min > epsilon n, so its search starts there.
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
    absl::StatusOr<std::uint64_t> k_min =
        to <= from ? absl::StatusOr<std::uint64_t>(to)
                   : SmallestSatisfying(from, to, [&](std::uint64_t k) { return above(n, k); });
    return k_min.ok() &&
           (exhausted ||
            BinomialTailLowerBound(n, *k_min, p, BinomialTail::kAtLeast) >= pass);
  };
  absl::StatusOr<std::uint64_t> n = SmallestSampleCount(held, ok, stop);
  if (exhausted && n.ok()) {
    return absl::ResourceExhaustedError(
        "the rate is too close to the threshold for a plan within the per-call work budget");
  }
  return n;
}

// Smallest total n (anticipated disagreement rates held fixed) at which the
// paired difference limits settle the comparison against tolerance t.
absl::StatusOr<std::uint64_t> PlanPairedComparison(const PairedCounts& p, double t,
                                                   double delta_upper, double delta_lower,
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
  return SmallestSampleCount(p.sample_count, ok, stop, &budget);
}

// The risk test's plan, toward PROMOTE (rate below epsilon: the hold-out
// planner of plan.h) or toward REJECT (PlanRejection). Adds its sentence to
// `plan` and returns the samples it needs, or nullopt when there is no plan.
absl::StatusOr<std::optional<std::uint64_t>> PlanRisk(const GatePolicy& policy,
                                                      const Evidence& evidence,
                                                      bool with_champion, const Measured& m,
                                                      double pass, const StopToken& stop,
                                                      HoldPlan* plan) {
  // The split a future run with hold-out counts will use.
  Evidence future = evidence;
  if (!future.holdout.has_value()) future.holdout = SampleCounts{0, 1};
  const Split next = MakeSplit(policy, future, with_champion);
  const bool has_binomial =
      std::any_of(next.families.begin(), next.families.end(), [](const FamilySpec* s) {
        return s->family == Family::kHoldoutExactBinomial;
      });
  const double epsilon = m.max_risk;
  const double rate = evidence.holdout.has_value() ? EmpiricalRate(*evidence.holdout)
                                                   : m.risk_certificate.empirical_risk;
  const std::string rate_words = evidence.holdout.has_value()
                                     ? "the observed hold-out error rate"
                                     : "the training error rate (no hold-out counts yet)";
  if (!has_binomial) {
    plan->reasons.push_back(
        "no hold-out plan: the policy does not allow the hold-out exact binomial bound");
    return std::optional<std::uint64_t>();
  }
  if (rate < epsilon) {
    HoldoutPlanRequest req;
    req.target_risk = epsilon;
    req.expected_risk = rate;
    req.failure_probability = next.per_family;
    req.pass_probability = pass;
    req.held_sample_count = m.held;
    absl::StatusOr<HoldoutPlan> h = PlanHoldout(req, stop);
    if (stop.StopRequested()) return stop.Status();
    if (h.ok() && h->reachable) {
      plan->reasons.push_back(absl::StrCat(
          "if the error rate stays near ", rate_words, " ", Num(rate), ", about ",
          h->additional_sample_count, " more labelled hold-out samples (", h->sample_count,
          " in all) give a PROMOTE on risk with probability ", Num(h->pass_probability_at_plan)));
      return std::optional<std::uint64_t>(h->additional_sample_count);
    }
    plan->reasons.push_back(
        absl::StrCat("no hold-out plan: ", h.ok() ? h->reason : std::string(h.status().message())));
    return std::optional<std::uint64_t>();
  }
  absl::StatusOr<std::uint64_t> n = PlanRejection(epsilon, rate, next.risk_lower, pass, m.held,
                                                  stop);
  if (stop.StopRequested()) return stop.Status();
  if (n.ok()) {
    const std::uint64_t more = *n - std::min(*n, m.held);
    plan->reasons.push_back(absl::StrCat(rate_words, " ", Num(rate),
                                         " is at or above the threshold: about ", more,
                                         " more labelled hold-out samples (", *n,
                                         " in all) would show it with probability ", Num(pass),
                                         " if the rate stays there (a REJECT)"));
    return std::optional<std::uint64_t>(more);
  }
  if (n.status().code() == absl::StatusCode::kResourceExhausted) {
    plan->reasons.push_back(absl::StrCat("no REJECT plan: ", rate_words, " ", Num(rate),
                                         " is so close to the threshold that a plan would "
                                         "take more than the per-call work budget"));
  } else {
    plan->reasons.push_back(absl::StrCat(rate_words, " ", Num(rate),
                                         " is at the threshold: no hold-out size up to "
                                         "2^53 is expected to settle the risk test"));
  }
  return std::optional<std::uint64_t>();
}

// The champion comparison's plan (paired comparisons only).
absl::StatusOr<std::optional<std::uint64_t>> PlanComparison(
    const ChampionComparison& champion, const Measured& m, const StopToken& stop,
    HoldPlan* plan) {
  if (!champion.paired.has_value()) {
    plan->reasons.push_back(
        "no plan for the unpaired champion comparison: score both models on one shared "
        "hold-out set for a paired, tighter comparison");
    return std::optional<std::uint64_t>();
  }
  absl::StatusOr<std::uint64_t> n =
      PlanPairedComparison(*champion.paired, m.tolerance, m.split.difference_upper,
                           m.split.difference_lower, stop);
  if (stop.StopRequested()) return stop.Status();
  if (n.ok()) {
    const std::uint64_t more = *n - std::min(*n, m.held);
    plan->reasons.push_back(absl::StrCat(
        "at the observed disagreement rates about ", more, " more shared hold-out samples (",
        *n,
        " in all) settle the champion comparison (anticipated-rate plan, about even odds)"));
    return std::optional<std::uint64_t>(more);
  }
  if (n.status().code() == absl::StatusCode::kResourceExhausted) {
    plan->reasons.push_back(
        "no plan for the champion comparison: the observed difference is so close to the "
        "tolerated regression that a plan would take more than the per-call work budget");
  } else {
    plan->reasons.push_back(
        "the observed difference equals the tolerated regression: no number of samples is "
        "expected to settle the champion comparison");
  }
  return std::optional<std::uint64_t>();
}

}  // namespace

absl::StatusOr<HoldPlan> PlanHold(const GatePolicy& policy, const Evidence& evidence,
                                  const std::optional<ChampionComparison>& champion,
                                  const Findings& f, const Measured& m, double pass,
                                  const StopToken& stop) {
  HoldPlan plan;
  std::uint64_t need = 0;
  bool plannable = true;
  if (f.below_min) need = m.min_holdout_sample_count - m.held;
  if (!f.risk_promote && !f.risk_reject) {
    absl::StatusOr<std::optional<std::uint64_t>> risk =
        PlanRisk(policy, evidence, champion.has_value(), m, pass, stop, &plan);
    if (!risk.ok()) return risk.status();
    if (risk->has_value()) {
      need = std::max(need, **risk);
    } else {
      plannable = false;
    }
  }
  if (f.has_champion && !f.cmp_promote && !f.cmp_reject) {
    absl::StatusOr<std::optional<std::uint64_t>> cmp =
        PlanComparison(*champion, m, stop, &plan);
    if (!cmp.ok()) return cmp.status();
    if (cmp->has_value()) {
      need = std::max(need, **cmp);
    } else {
      plannable = false;
    }
  }
  if (plannable && need > 0) plan.additional_sample_count = need;
  return plan;
}

}  // namespace riskbound::core::gate_internal
