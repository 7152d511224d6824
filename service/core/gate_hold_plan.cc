// The gate's HOLD planner (gate_internal.h, PlanHold): how many more labelled
// hold-out samples are expected to settle a HOLD, if the observed rates stay
// where they are.
#include <algorithm>
#include <cmath>
#include <functional>
#include <optional>
#include <limits>
#include <string>
#include <utility>
#include <vector>

#include "absl/strings/str_cat.h"
#include "boost/math/distributions/binomial.hpp"
#include "boost/math/distributions/normal.hpp"
#include "boost/math/policies/policy.hpp"
#include "service/core/anytime.h"
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
constexpr double kPairedPlanCpuSeconds = 0.08;
// In sequential mode each anytime limit costs a root search on a five-term
// mixture (anytime.h), some ten times a Clopper-Pearson limit: a plan of
// 40,000 samples takes about a second.
constexpr double kPairedAnytimePlanCpuSeconds = 2.0;
// The paired plan's enumeration takes B and C one by one up to this many
// standard deviations' worth of counts, in blocks of 1/kPairedGrid of a
// standard deviation beyond (PairedPassProbability).
constexpr double kPairedGrid = 32.0;

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

// The paired comparison's pass probability at total n: a lower bound on the
// probability that the difference limits at n samples settle the comparison
// against tolerance t, toward PROMOTE (upper limit at delta <= t) or toward
// REJECT (lower limit at delta > t), when the n examples fall into "only the
// challenger wrong" (B), "only the champion wrong" (C) and the rest with the
// observed rates rate_b and rate_c. Exact enumeration: B ~ Bin(n, rate_b)
// and, given B, C ~ Bin(n - B, r), r = rate_c / (1 - rate_b) (a
// multinomial's conditional). The upper limit falls as C grows and rises
// with B (a Clopper-Pearson limit grows with its count), so for each B the
// settling C form an interval, [c_min(B), n - B] toward PROMOTE and
// [0, c_fail(B) - 1] toward REJECT, whose ends only grow with B, and its
// probability is a binomial tail (numeric.h, never above the true value).
// Where the counts are large (standard deviations above kPairedGrid), B is
// taken in blocks and C on a grid of 1/kPairedGrid of their standard
// deviations, each block counted at its least favourable B (its last toward
// PROMOTE, first toward REJECT: the fewest settling C, and the number of
// remaining examples that makes the tail smallest), so the sum stays a lower
// bound at a cost that does not grow with n; smaller counts are enumerated
// one by one. B and C beyond 6 standard deviations (plus 2) of their means
// are left out, and the sum is lowered by 1e-9 (and 1e-9 relative) for the
// rounding of the terms, so the result never overstates the probability.
// With `enough`, the sum stops once it is known to reach it or known to fall
// short of it. Checks `budget` once per block; once spent it returns 1 (so a
// search winds down) and the caller reports RESOURCE_EXHAUSTED. With
// `anytime` (sequential mode) the limits are the anytime-valid ones of
// anytime.h, as the gate computes them in that mode; they too grow with
// their count, so the same intervals apply.
double PairedPassProbability(std::uint64_t n, double rate_b, double rate_c, double t, double delta,
                             bool toward_promote, std::optional<double> enough, WorkBudget* budget,
                             bool anytime) {
  const auto upper_limit = [anytime](std::uint64_t size, std::uint64_t k, double d) {
    return anytime ? AnytimeUpperLimit(size, k, d).value : BinomialUpperLimit(size, k, d).value;
  };
  const auto lower_limit = [anytime](std::uint64_t size, std::uint64_t k, double d) {
    return anytime ? AnytimeLowerLimit(size, k, d).value : BinomialLowerLimit(size, k, d).value;
  };
  const double nd = static_cast<double>(n);
  const auto sd = [](std::uint64_t count, double p) {
    return std::sqrt(static_cast<double>(count) * p * (1.0 - p));
  };
  const auto window = [&](std::uint64_t count, double p) {
    const double c = static_cast<double>(count);
    const double mean = c * p;
    const double spread = 6.0 * sd(count, p) + 2.0;
    const double lo = std::max(0.0, std::floor(mean - spread));
    const double hi = std::min(c, std::ceil(mean + spread));
    return std::pair<std::uint64_t, std::uint64_t>(static_cast<std::uint64_t>(lo),
                                                   static_cast<std::uint64_t>(hi));
  };
  const auto [b_lo, b_hi] = window(n, rate_b);
  const double r = rate_b < 1.0 ? std::min(1.0, rate_c / (1.0 - rate_b)) : 0.0;
  const std::uint64_t b_stride =
      std::max<std::uint64_t>(1, static_cast<std::uint64_t>(sd(n, rate_b) / kPairedGrid));
  const std::uint64_t c_stride =
      std::max<std::uint64_t>(1, static_cast<std::uint64_t>(sd(n, r) / kPairedGrid));
  // Errors come back as NaN (skipped below, which only lowers the sum), never
  // as an exception.
  using Quiet = boost::math::policies::policy<
      boost::math::policies::domain_error<boost::math::policies::ignore_error>,
      boost::math::policies::overflow_error<boost::math::policies::ignore_error>,
      boost::math::policies::evaluation_error<boost::math::policies::ignore_error>>;
  const boost::math::binomial_distribution<double, Quiet> b_law(nd, rate_b);
  // The limits exactly as PairedDifferenceUpper / PairedDifferenceLower
  // (paired.h) compute them, each once: the B side per block, the C side
  // cached over the union of the C windows.
  const double half = delta / 2.0;
  std::uint64_t c_first = n;
  std::uint64_t c_last = 0;
  for (std::uint64_t b : {b_lo, b_hi}) {
    const auto [lo, hi] = window(n - b, r);
    c_first = std::min(c_first, lo);
    c_last = std::max(c_last, hi);
  }
  // The C window is not monotone in n - B at small counts: widen to all B.
  if (b_hi - b_lo <= 4096) {
    for (std::uint64_t b = b_lo; b <= b_hi; ++b) {
      const auto [lo, hi] = window(n - b, r);
      c_first = std::min(c_first, lo);
      c_last = std::max(c_last, hi);
    }
  }
  std::vector<double> c_limits(c_last - c_first + 1, std::numeric_limits<double>::quiet_NaN());
  const auto c_limit = [&](std::uint64_t c) {
    double& v = c_limits[c - c_first];
    if (std::isnan(v)) {
      v = toward_promote ? lower_limit(n, c, half) : upper_limit(n, c, half);
    }
    return v;
  };
  // `from` is a proven end for every block to come: c_min(B) >= from
  // (PROMOTE), every C < from settles (REJECT).
  std::uint64_t from = 0;
  double sum = 0.0;
  double mass = 0.0;  // of the B seen so far
  for (std::uint64_t b1 = b_lo; b1 <= b_hi;) {
    if (budget->Spent()) return 1.0;
    const std::uint64_t b2 = std::min(b_hi, b1 + b_stride - 1);
    // P(b1 <= B <= b2): Boost's pmf at b1, then the ratio recurrence.
    double pmf = boost::math::pdf(b_law, static_cast<double>(b1));
    double block = 0.0;
    for (std::uint64_t b = b1; b <= b2 && pmf > 0.0; ++b) {
      block += pmf;
      pmf *= (nd - static_cast<double>(b)) / static_cast<double>(b + 1) * rate_b /
             (1.0 - rate_b);
    }
    const std::uint64_t next = b2 + 1;
    if (!(block > 0.0)) {
      b1 = next;
      continue;
    }
    mass += block;
    // The block's least favourable B and its remaining examples.
    const std::uint64_t b = toward_promote ? b2 : b1;
    const std::uint64_t m = n - b;
    const auto [c_lo0, c_hi0] = window(m, r);
    const std::uint64_t c_lo = std::max(c_lo0, c_first);
    const std::uint64_t c_hi = std::min(c_hi0, c_last);
    const double b_limit = toward_promote ? upper_limit(n, b, half) : lower_limit(n, b, half);
    const auto settles = [&](std::uint64_t c) {
      const double difference = std::clamp(b_limit - c_limit(c), -1.0, 1.0);
      return toward_promote ? difference <= t : difference > t;
    };
    const std::uint64_t start = std::max(from, c_lo);
    double tail = 0.0;
    if (toward_promote && start <= c_hi) {
      // The first grid point from `start` that settles (c_hi last).
      std::optional<std::uint64_t> failed;
      std::uint64_t c = start;
      bool found = false;
      while (true) {
        if (settles(c)) {
          found = true;
          break;
        }
        failed = c;
        if (c == c_hi) break;
        c = std::min(c_hi, c + c_stride);
      }
      if (failed.has_value()) from = *failed + 1;  // c_min > the failed point
      if (found) tail = BinomialTailLowerBound(m, c, r, BinomialTail::kAtLeast);
    } else if (!toward_promote && start <= c_hi) {
      // The last grid point from `start` that settles (c_hi last).
      std::optional<std::uint64_t> settled;
      if (start == from && from >= 1) settled = from - 1;  // every C < from settles
      std::uint64_t c = start;
      while (settles(c)) {
        settled = c;
        if (c == c_hi) break;
        c = std::min(c_hi, c + c_stride);
      }
      if (settled.has_value()) {
        from = std::max(from, *settled + 1);
        tail = BinomialTailLowerBound(m, *settled, r, BinomialTail::kAtMost);
      }
    } else if (!toward_promote && from >= 1) {
      // The window lies below `from`: every C in it settles.
      tail = BinomialTailLowerBound(m, from - 1, r, BinomialTail::kAtMost);
    }
    sum += block * tail;
    b1 = next;
    if (enough.has_value()) {
      // Known to reach it, or to fall short even if every B to come settled.
      if (sum * (1.0 - 1e-9) - 1e-9 >= *enough) break;
      if (sum + std::max(0.0, 1.0 - mass) + 1e-9 < *enough) break;
    }
  }
  return std::max(0.0, sum * (1.0 - 1e-9) - 1e-9);
}

// The paired comparison's plan: a total n >= the samples held at which the
// comparison settles against tolerance t with probability >= pass
// (PairedPassProbability) when the disagreement rates stay as observed. The
// search (numeric.h SmallestSatisfying) runs over a grid of sizes held + j *
// step, step = 1/256 of a normal-approximation guess (so a plan of a
// million samples needs a handful of enumerations), starting at that guess:
//   n ~ ((z_half (s_b + s_c) + z_pass s_d) / |observed - t|)^2,
// s_b, s_c the Bernoulli standard deviations of the two disagreement kinds,
// s_d that of their difference, z_x the standard normal quantile of 1 - x.
// The probability is not monotone in n (the limits move in steps), so the
// answer may lie a little above the smallest such n; the n returned always
// reaches pass (checked by the enumeration itself, never by the guess).
// With `anytime` (sequential mode) the enumeration uses the anytime limits
// and the guess is scaled by 3.5, about the square of their width ratio
// (docs/gate.md).
absl::StatusOr<std::uint64_t> PlanPairedComparison(const PairedCounts& p, double t,
                                                   double delta_upper, double delta_lower,
                                                   double pass, const StopToken& stop,
                                                   bool anytime) {
  const double rate_b =
      static_cast<double>(p.only_challenger_wrong_count) / static_cast<double>(p.sample_count);
  const double rate_c =
      static_cast<double>(p.only_champion_wrong_count) / static_cast<double>(p.sample_count);
  const double observed = rate_b - rate_c;
  if (observed == t) return absl::NotFoundError("the observed difference equals the tolerance");
  const bool toward_promote = observed < t;
  const double delta = toward_promote ? delta_upper : delta_lower;
  const boost::math::normal_distribution<double> normal;
  const double z_half = boost::math::quantile(boost::math::complement(normal, delta / 2.0));
  const double z_pass = boost::math::quantile(normal, pass);
  const double s_b = std::sqrt(rate_b * (1.0 - rate_b));
  const double s_c = std::sqrt(rate_c * (1.0 - rate_c));
  const double s_d = std::sqrt(rate_b * (1.0 - rate_b) + rate_c * (1.0 - rate_c) +
                               2.0 * rate_b * rate_c);
  const double root = std::max(0.0, z_half * (s_b + s_c) + z_pass * s_d) /
                      std::fabs(observed - t);
  const double guess_n =
      std::clamp(root * root * (anytime ? 3.5 : 1.0), 1.0, static_cast<double>(kMaxSampleCount));
  const std::uint64_t held = p.sample_count;
  const std::uint64_t guess = std::max(held, static_cast<std::uint64_t>(guess_n));
  const std::uint64_t step = std::max<std::uint64_t>(1, guess / 256);
  const std::uint64_t last = (kMaxSampleCount - held) / step;
  WorkBudget budget(anytime ? kPairedAnytimePlanCpuSeconds : kPairedPlanCpuSeconds);
  bool stopped = false;
  const std::function<bool(std::uint64_t)> reaches = [&](std::uint64_t j) {
    if (stopped || stop.StopRequested()) {
      stopped = true;
      return true;
    }
    if (budget.Spent()) return true;
    const std::uint64_t n = held + j * step;
    return PairedPassProbability(n, rate_b, rate_c, t, delta, toward_promote, pass, &budget,
                                 anytime) >= pass;
  };
  absl::StatusOr<std::uint64_t> j = SmallestSatisfying(0, last, reaches, (guess - held) / step);
  if (stopped) return stop.Status();
  if (budget.spent()) return absl::ResourceExhaustedError("over the plan's work budget");
  if (!j.ok()) return absl::NotFoundError("no sample size up to 2^53 settles it");
  return held + *j * step;
}

// The words of one rate test's plan sentences: the overall risk test or one
// slice's.
struct RateTestWords {
  // "the observed hold-out error rate", ...
  std::string rate;
  // "labelled hold-out samples", "labelled hold-out samples from slice 'x'"
  std::string samples;
  // "a PROMOTE on risk", "slice 'x' clearing its limit"
  std::string promote;
  // "a REJECT", "slice 'x' exceeding its limit, a REJECT" (in parentheses
  // after a REJECT plan's sentence)
  std::string reject;
  // "a REJECT on risk", ... (after "give" in sequential mode)
  std::string reject_outcome;
  // "the risk test", "the test of slice 'x'"
  std::string test;
};

// One rate test's plan, toward PROMOTE (rate below epsilon: the hold-out
// planner of plan.h, or PlanAnytime in sequential mode) or toward REJECT
// (PlanRejection, or PlanAnytime), from `held` samples with the upper and
// lower bounds at `upper_delta` and `lower_delta`. Adds its sentence to
// `reasons` and returns the samples it needs, or nullopt when there is no
// plan.
absl::StatusOr<std::optional<std::uint64_t>> PlanRate(double epsilon, double rate,
                                                      std::uint64_t held, double upper_delta,
                                                      double lower_delta, double pass,
                                                      bool sequential, const RateTestWords& w,
                                                      const StopToken& stop,
                                                      std::vector<std::string>* reasons) {
  if (sequential) {
    const bool promote = rate < epsilon;
    absl::StatusOr<std::uint64_t> n =
        PlanAnytime(epsilon, rate, promote ? upper_delta : lower_delta, pass, held, stop);
    if (stop.StopRequested()) return stop.Status();
    if (n.ok()) {
      const std::uint64_t more = *n - std::min(*n, held);
      reasons->push_back(absl::StrCat("if the error rate stays near ", w.rate, " ", Num(rate),
                                      ", about ", more, " more ", w.samples, " (", *n,
                                      " in all) give ", promote ? w.promote : w.reject_outcome,
                                      " with probability at least ", Num(pass),
                                      " under the anytime-valid bounds (sequential mode)"));
      return std::optional<std::uint64_t>(more);
    }
    reasons->push_back(absl::StrCat(
        w.rate, " ", Num(rate),
        promote || rate > epsilon
            ? absl::StrCat(" is too close to the threshold: no hold-out size up to 2^40 is "
                           "expected to settle ",
                           w.test, " under the anytime-valid bounds")
            : absl::StrCat(" is at the threshold: no hold-out size is expected to settle ",
                           w.test)));
    return std::optional<std::uint64_t>();
  }
  if (rate < epsilon) {
    HoldoutPlanRequest req;
    req.target_risk = epsilon;
    req.expected_risk = rate;
    req.failure_probability = upper_delta;
    req.pass_probability = pass;
    req.held_sample_count = held;
    absl::StatusOr<HoldoutPlan> h = PlanHoldout(req, stop);
    if (stop.StopRequested()) return stop.Status();
    if (h.ok() && h->reachable) {
      reasons->push_back(absl::StrCat("if the error rate stays near ", w.rate, " ", Num(rate),
                                      ", about ", h->additional_sample_count, " more ",
                                      w.samples, " (", h->sample_count, " in all) give ",
                                      w.promote, " with probability ",
                                      Num(h->pass_probability_at_plan)));
      return std::optional<std::uint64_t>(h->additional_sample_count);
    }
    reasons->push_back(
        absl::StrCat("no hold-out plan: ", h.ok() ? h->reason : std::string(h.status().message())));
    return std::optional<std::uint64_t>();
  }
  absl::StatusOr<std::uint64_t> n = PlanRejection(epsilon, rate, lower_delta, pass, held, stop);
  if (stop.StopRequested()) return stop.Status();
  if (n.ok()) {
    const std::uint64_t more = *n - std::min(*n, held);
    reasons->push_back(absl::StrCat(w.rate, " ", Num(rate), " is at or above the threshold: about ",
                                    more, " more ", w.samples, " (", *n,
                                    " in all) would show it with probability ", Num(pass),
                                    " if the rate stays there (", w.reject, ")"));
    return std::optional<std::uint64_t>(more);
  }
  if (n.status().code() == absl::StatusCode::kResourceExhausted) {
    reasons->push_back(absl::StrCat("no REJECT plan: ", w.rate, " ", Num(rate),
                                    " is so close to the threshold that a plan would "
                                    "take more than the per-call work budget"));
  } else {
    reasons->push_back(absl::StrCat(w.rate, " ", Num(rate),
                                    " is at the threshold: no hold-out size up to "
                                    "2^53 is expected to settle ",
                                    w.test));
  }
  return std::optional<std::uint64_t>();
}

// The risk test's plan (PlanRate on the hold-out counts, or on the training
// rate when there are none yet), at the shares a future run with hold-out
// counts will use. Adds its sentence to `plan`.
absl::StatusOr<std::optional<std::uint64_t>> PlanRisk(const GatePolicy& policy,
                                                      const Evidence& evidence,
                                                      bool with_champion, const Measured& m,
                                                      double pass, const StopToken& stop,
                                                      HoldPlan* plan) {
  // The split a future run with hold-out counts will use.
  Evidence future = evidence;
  if (!future.holdout.has_value()) future.holdout = SampleCounts{0, 1};
  const Split next = MakeSplit(policy, future, with_champion);
  const Family needed = policy.sequential ? Family::kHoldoutAnytime : Family::kHoldoutExactBinomial;
  const bool allowed = std::any_of(next.families.begin(), next.families.end(),
                                   [needed](const FamilySpec* s) { return s->family == needed; });
  if (!allowed) {
    plan->reasons.push_back(policy.sequential
                                ? "no hold-out plan: the policy does not allow the anytime-valid "
                                  "hold-out bound"
                                : "no hold-out plan: the policy does not allow the hold-out "
                                  "exact binomial bound");
    return std::optional<std::uint64_t>();
  }
  const double rate = evidence.holdout.has_value() ? EmpiricalRate(*evidence.holdout)
                                                   : m.risk_certificate.empirical_risk;
  RateTestWords words;
  words.rate = evidence.holdout.has_value() ? "the observed hold-out error rate"
                                            : "the training error rate (no hold-out counts yet)";
  words.samples = "labelled hold-out samples";
  words.promote = "a PROMOTE on risk";
  words.reject = "a REJECT";
  words.reject_outcome = "a REJECT on risk";
  words.test = "the risk test";
  return PlanRate(m.max_risk, rate, m.held, next.per_family, next.risk_lower, pass,
                  policy.sequential, words, stop, &plan->reasons);
}

// CPU time all slice plans of one call may take together (each plan also
// has its own budget, so the call's worst case is this plus one plan's).
constexpr double kSlicePlansCpuSeconds = 0.25;

// Each undecided slice's plan, worst first, on its own counts, limit and
// bound shares; its sentence is appended to the slice's reason. Returns the
// sum of the plans, or nullopt when some undecided slice has none.
absl::StatusOr<std::optional<std::uint64_t>> PlanSlices(const Measured& m, double pass,
                                                        const StopToken& stop,
                                                        std::vector<SliceCheck>* slices,
                                                        HoldPlan* plan) {
  WorkBudget budget(kSlicePlansCpuSeconds);
  std::uint64_t sum = 0;
  bool all = true;
  std::size_t unplanned = 0;
  for (SliceCheck& s : *slices) {
    if (s.outcome != SliceOutcome::kUndecided) continue;
    if (budget.Spent()) {
      s.reason += "; not planned: the call's planning budget for slices ran out";
      all = false;
      ++unplanned;
      continue;
    }
    const std::string quoted = absl::StrCat("'", s.slice_name, "'");
    RateTestWords words;
    words.rate = absl::StrCat("the observed error rate of slice ", quoted);
    words.samples = absl::StrCat("labelled hold-out samples from slice ", quoted);
    words.promote = absl::StrCat("slice ", quoted, " clearing its limit");
    words.reject = absl::StrCat("slice ", quoted, " exceeding its limit, a REJECT");
    words.reject_outcome = words.reject;
    words.test = absl::StrCat("the test of slice ", quoted);
    std::vector<std::string> sentence;
    const double half = s.failure_probability / 2.0;
    absl::StatusOr<std::optional<std::uint64_t>> more =
        PlanRate(s.max_risk, EmpiricalRate(SampleCounts{s.error_count, s.sample_count}),
                 s.sample_count, half, half, pass, m.sequential, words, stop, &sentence);
    if (!more.ok()) return more.status();
    for (const std::string& t : sentence) absl::StrAppend(&s.reason, "; ", t);
    if (more->has_value()) {
      s.additional_sample_count = **more;
      sum = std::min<std::uint64_t>(sum + **more, kMaxSampleCount);
    } else {
      all = false;
    }
  }
  if (unplanned > 0) {
    plan->reasons.push_back(absl::StrCat(unplanned,
                                         " undecided slices were not planned: the call's "
                                         "planning budget for slices ran out"));
  }
  if (!all) return std::optional<std::uint64_t>();
  plan->reasons.push_back(absl::StrCat("the undecided slices need about ", sum,
                                       " more labelled hold-out samples in all, from those "
                                       "slices (each slice's plan: slices)"));
  return std::optional<std::uint64_t>(sum);
}

// The champion comparison's plan (paired comparisons only), at the plan
// pass probability `pass`.
absl::StatusOr<std::optional<std::uint64_t>> PlanComparison(const ChampionComparison& champion,
                                                            const Measured& m, double pass,
                                                            const StopToken& stop, HoldPlan* plan) {
  if (!champion.paired.has_value()) {
    plan->reasons.push_back(
        "no plan for the unpaired champion comparison: score both models on one shared "
        "hold-out set for a paired, tighter comparison");
    return std::optional<std::uint64_t>();
  }
  absl::StatusOr<std::uint64_t> n =
      PlanPairedComparison(*champion.paired, m.tolerance, m.split.difference_upper,
                           m.split.difference_lower, pass, stop, m.sequential);
  if (stop.StopRequested()) return stop.Status();
  if (n.ok()) {
    const std::uint64_t more = *n - std::min(*n, m.held);
    plan->reasons.push_back(absl::StrCat(
        "if the disagreement rates stay as observed, about ", more,
        " more shared hold-out samples (", *n,
        " in all) settle the champion comparison with probability at least ", Num(pass),
        " (the policy's plan pass probability; exact binomial enumeration of the disagreement "
        "counts",
        m.sequential ? ", for the anytime-valid limits of sequential mode)" : ")"));
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
                                  const StopToken& stop, std::vector<SliceCheck>* slices) {
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
        PlanComparison(*champion, m, pass, stop, &plan);
    if (!cmp.ok()) return cmp.status();
    if (cmp->has_value()) {
      need = std::max(need, **cmp);
    } else {
      plannable = false;
    }
  }
  if (!f.slices_promote && !f.slices_reject) {
    absl::StatusOr<std::optional<std::uint64_t>> sl = PlanSlices(m, pass, stop, slices, &plan);
    if (!sl.ok()) return sl.status();
    if (sl->has_value()) {
      need = std::max(need, **sl);
    } else {
      plannable = false;
    }
  }
  if (plannable && need > 0) plan.additional_sample_count = need;
  return plan;
}

}  // namespace riskbound::core::gate_internal
