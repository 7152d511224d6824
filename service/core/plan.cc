#include "service/core/plan.h"

#include <algorithm>
#include <charconv>
#include <cmath>
#include <exception>
#include <functional>
#include <iterator>
#include <limits>
#include <map>
#include <utility>
#include <vector>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "absl/strings/str_join.h"
#include "service/core/certify.h"
#include "service/core/families.h"
#include "service/core/field_violation.h"
#include "service/core/numeric.h"
#include "service/core/vc.h"
#include "service/core/work_budget.h"

namespace riskbound::core {
namespace {

using Predicate = std::function<bool(std::uint64_t)>;

// CPU time one plan's searches may take. Ordinary plans need well under a
// millisecond, large ones (answers near 1e9) a few milliseconds; only an
// expected rate within a hair of the target (whose answer lies near or
// beyond 2^53, with bound evaluations at huge n) comes near it. Past it the
// plan is reported unreachable with kOverBudget. With the check of the
// teeth below a pass-probability plan (kMinimalityBudgetSeconds) and the
// final evaluations, a plan stays below 100 ms of CPU.
constexpr double kPlanCpuBudgetSeconds = 0.08;

// The part of that budget kept for what every plan computes after its
// searches (k_max at the answer, the final limit and pass probability): the
// checks that no smaller n meets the rule stop once only this is left.
constexpr double kPlanReserveSeconds = 0.012;

// CPU time each check that no smaller n meets the rule may take at most (it
// stops there and the rule says down to which n it got).
constexpr double kMinimalityBudgetSeconds = 0.01;

constexpr char kOverBudget[] =
    "the expected error rate is so close to the target risk that the plan would need "
    "more than the per-call work budget; the answer would lie near or beyond 2^53 "
    "samples: lower the expected rate or raise the target";

constexpr char kBeyondRange[] =
    "more than 2^53 (about 9.0e15) samples would be needed: the target is out of reach "
    "in practice; raise the target risk or lower the capacity";

// k(n) = ceil(rate * n) in double precision, at most n. Non-decreasing in n
// (IEEE multiplication by a fixed positive rate is monotone).
std::uint64_t ErrorsAt(double rate, std::uint64_t n) {
  if (rate <= 0.0) return 0;
  const double k = std::ceil(rate * static_cast<double>(n));
  if (k >= static_cast<double>(n)) return n;
  return static_cast<std::uint64_t>(k);
}

// Counts evaluations of a bound predicate ok(n, k) and watches a StopToken:
// once it stops, every evaluation answers true without computing, so the
// (logarithmic) searches around it run out in a few cheap steps; the caller
// then sees stopped() and returns the token's status, never the search's
// result.
class CountedBound {
 public:
  CountedBound(std::function<bool(std::uint64_t, std::uint64_t)> ok,
               std::uint64_t* evaluations, const StopToken& stop)
      : ok_(std::move(ok)), evaluations_(evaluations), stop_(stop) {}
  bool operator()(std::uint64_t n, std::uint64_t k) const {
    if (stopped_ || stop_.StopRequested()) {
      stopped_ = true;
      return true;
    }
    if (budget_.Spent()) return true;
    ++*evaluations_;
    return ok_(n, k);
  }
  bool stopped() const { return stopped_; }
  // True once stopped or over budget, checking both now.
  bool spent() const {
    if (!stopped_ && stop_.StopRequested()) stopped_ = true;
    return stopped_ || budget_.Spent();
  }
  // True when the work budget ran out (the searches' answers are then void).
  bool exhausted() const { return budget_.spent(); }
  // True once less than kPlanReserveSeconds of the budget is left (or
  // stopped): the optional checks stop there, so that what every plan needs
  // afterwards still fits.
  bool nearly_spent() const { return spent() || reserve_.Spent(); }

 private:
  std::function<bool(std::uint64_t, std::uint64_t)> ok_;
  std::uint64_t* evaluations_;
  const StopToken& stop_;
  mutable WorkBudget budget_{kPlanCpuBudgetSeconds};
  mutable WorkBudget reserve_{kPlanCpuBudgetSeconds - kPlanReserveSeconds};
  mutable bool stopped_ = false;
};

// The samples after a plan's n over which the bound must stay at or below
// the target: ceil(2 / rate), at most kPlanMaxSamples; 0 for rate 0 (no
// sawtooth without errors).
std::uint64_t SawtoothWindow(double rate) {
  if (rate <= 0.0) return 0;
  const double w = std::ceil(2.0 / rate);
  return w >= static_cast<double>(kPlanMaxSamples) ? kPlanMaxSamples
                                                   : static_cast<std::uint64_t>(w);
}

// Smallest n in [lo, kPlanMaxSamples] with ok(n, k(n)) and ok(s, k(s)) for
// every tooth start s (first n' with k(n') > k(n'-1)) in (n, n + ceil(2/rate)]:
// the sawtooth-robust answer of the file comment. Within a tooth k is fixed
// and the bound falls in n, so these points carry the window's maximum.
// NOT_FOUND when even kPlanMaxSamples fails.
absl::StatusOr<std::uint64_t> RobustSmallest(double rate, std::uint64_t lo,
                                             const CountedBound& ok) {
  const std::uint64_t window = SawtoothWindow(rate);
  const Predicate robust = [&](std::uint64_t n) {
    if (!ok(n, ErrorsAt(rate, n))) return false;
    const std::uint64_t end = n + std::min(window, kPlanMaxSamples - n);
    std::uint64_t cur = n;
    while (cur < end) {
      const std::uint64_t k = ErrorsAt(rate, cur);
      const absl::StatusOr<std::uint64_t> next = SmallestSatisfying(
          cur + 1, end, [&](std::uint64_t s) { return ErrorsAt(rate, s) > k; });
      if (!next.ok()) break;  // no further tooth inside the window
      if (!ok(*next, ErrorsAt(rate, *next))) return false;
      cur = *next;
    }
    return true;
  };
  return SmallestSatisfying(lo, kPlanMaxSamples, robust);
}

// The smallest robust n (the rule of RobustSmallest) of a hold-out plan,
// given one, n_found, that RobustSmallest's bisection returned: robust(n) is
// not monotone in n, so the bisection can stop at a later crossing. Robust
// n are the starts of runs of at least window + 1 consecutive good sizes
// (good(m): the bound at m samples and ceil(rate m) errors is <= eps); within
// a tooth (a fixed count) the bound falls in m, so a tooth's good sizes are
// a suffix of it. The sizes below n_found are classified downward, tooth by
// tooth: a run's lowest good size is found by bisection within each tooth,
// and a block of teeth [lo, K] whose sizes are all bad is ruled out at once
// by one tail: every m <= top has at least lo errors (if in those teeth), so
// P(Bin(top, eps) <= lo) > delta makes every bound there exceed eps
// (Clopper & Pearson 1934: the limit at (m, j) exceeds eps iff P(Bin(m,
// eps) <= j) > delta, which grows as m falls and j rises). Blocks double
// while they are ruled out and halve when not. Returns the lowest qualifying
// run start found; *checked_down_to is 0 when every size down to `floor`
// was classified, else the lowest size classified when `budget` ran out.
std::uint64_t SmallestRobustHoldout(double rate, double eps, double delta, std::uint64_t floor,
                                    std::uint64_t n_found, const CountedBound& ok,
                                    WorkBudget* budget, std::uint64_t* checked_down_to) {
  *checked_down_to = 0;
  if (rate <= 0.0) return n_found;  // no sawtooth: the predicate is monotone
  const std::uint64_t window = SawtoothWindow(rate);
  const auto good = [&](std::uint64_t m) { return ok(m, ErrorsAt(rate, m)); };
  // First size with at least k errors (ErrorsAt is monotone in m).
  const auto tooth_start = [&](std::uint64_t m) {
    const std::uint64_t k = ErrorsAt(rate, m);
    return SmallestSatisfying(1, m, [&](std::uint64_t x) { return ErrorsAt(rate, x) >= k; })
        .value_or(m);
  };
  // Lowest good size of the run through `start` (good), extended downward
  // tooth by tooth while the end of the tooth below is good too.
  // Stops early when a budget runs out: every size from the start returned
  // up to the run's end is good all the same.
  bool out_of_time = false;
  const auto time_left = [&] {
    if (!out_of_time && (ok.nearly_spent() || budget->Spent())) out_of_time = true;
    return !out_of_time;
  };
  const auto run_start_from = [&](std::uint64_t start) {
    while (time_left()) {
      const std::uint64_t t = tooth_start(start);
      std::uint64_t g = start;
      if (t < start) {
        g = good(t) ? t
                    : SmallestSatisfying(t + 1, start, good).value_or(start);
      }
      start = g;
      if (g != t || t <= floor || !good(t - 1)) break;
      start = t - 1;
    }
    return start;
  };
  std::uint64_t answer = run_start_from(n_found);  // its run reaches n_found + window
  if (out_of_time) {
    *checked_down_to = answer;
    return answer;
  }
  if (answer < 2 || answer - 1 <= floor) return answer;
  std::uint64_t top = answer - 2;  // answer - 1 is bad
  std::uint64_t block = 1;
  while (top > floor) {
    if (!time_left()) {
      *checked_down_to = top + 1;
      return answer;
    }
    const std::uint64_t k = ErrorsAt(rate, top);
    if (block > 1) {
      const std::uint64_t lo = k + 1 > block ? k + 1 - block : 0;
      bool unused = true;
      if (BinomialTailLowerBound(top, lo, eps, BinomialTail::kAtMost, &unused) > delta) {
        // Every size from the start of tooth lo up to top is bad.
        const std::uint64_t start_lo =
            lo == 0 ? 0
                    : SmallestSatisfying(1, top, [&](std::uint64_t x) {
                        return ErrorsAt(rate, x) >= lo;
                      }).value_or(top);
        if (start_lo <= floor + 1) break;
        top = start_lo - 1;
        block = block > kPlanMaxSamples / 2 ? block : 2 * block;
        continue;
      }
      block /= 2;
      continue;
    }
    if (!good(top)) {
      // Bad at top, so bad from the start of its tooth up to top; try a
      // block of two teeth next.
      const std::uint64_t t = tooth_start(top);
      if (t <= floor + 1) break;
      top = t - 1;
      block = 2;
      continue;
    }
    // A run ends at top (top + 1 is bad).
    const std::uint64_t start = run_start_from(top);
    if (out_of_time) continue;
    if (top - start >= window) answer = start;
    if (start < 2 || start - 1 <= floor) break;
    top = start - 2;
    block = 1;
  }
  return answer;
}

// The upper bound HoldoutExactBinomial reports: the Clopper-Pearson limit,
// clipped to [0, 1] and never below k/n (as MakeCertificate does).
double HoldoutUpper(std::uint64_t n, std::uint64_t k, double delta, bool* exact) {
  const TailLimit t = BinomialUpperLimit(n, k, delta);
  if (!t.exact && exact != nullptr) *exact = false;
  const double v = std::isnan(t.value) ? 1.0 : std::clamp(t.value, 0.0, 1.0);
  return std::max(v, static_cast<double>(k) / static_cast<double>(n));
}


// The shortest decimal that reads back as v (std::to_chars), for rule texts
// that name the request's values exactly.
std::string Shortest(double v) {
  char buf[32];
  const std::to_chars_result r = std::to_chars(buf, buf + sizeof(buf), v);
  return std::string(buf, r.ptr);
}

std::string Unreachable(double target, double expected, absl::string_view what) {
  if (target >= 1.0) {
    return "a target risk of 1 or more is met by every model and says nothing; no "
           "bound is planned for it: choose a target below 1";
  }
  return absl::StrFormat(
      "the %s %g is not below the target risk %g: an upper bound on the true error "
      "never falls below the error rate itself, so no sample size reaches the target",
      std::string(what), expected, target);
}

void CheckHeld(const std::string& prefix, std::uint64_t held, std::vector<FieldViolation>* v) {
  if (held > kPlanMaxSamples) {
    v->push_back({prefix + ".held_sample_count",
                  absl::StrCat("must be at most 2^53 = ", kPlanMaxSamples, ", got ", held)});
  }
}

void CheckTarget(const std::string& prefix, double target, std::vector<FieldViolation>* v) {
  if (!std::isfinite(target) || target <= 0.0) {
    v->push_back({prefix + ".target_risk",
                  absl::StrCat("must be a finite risk above 0, got ",
                               std::isnan(target) ? std::string("NaN") : absl::StrCat(target))});
  }
}

// The rule of an anticipated-rate plan, with every value substituted:
// `bound` names the bound ("exact binomial (Clopper-Pearson) bound"), `n`
// the sample size's letter.
std::string AnticipatedRateRule(absl::string_view bound, absl::string_view n, double rate,
                                double target, absl::string_view source) {
  if (rate <= 0.0) {
    return absl::StrFormat("smallest %s at which the %s with no errors is <= %g (%s)", n, bound,
                           target, source);
  }
  return absl::StrFormat(
      "smallest %s at which the %s at ceil(%g %s) errors is <= %g, and stays <= %g for the "
      "next %d samples (2/%g rounded up: the count grows by one every 1/%g samples, which "
      "makes the bound a sawtooth in %s) (%s)",
      n, bound, rate, n, target, target, SawtoothWindow(rate), rate, rate, n, source);
}

// ceil(ln delta / log1p(-eps)), or nullopt when it exceeds kPlanMaxSamples.
std::optional<std::uint64_t> ZeroFailureSamples(double eps, double delta) {
  if (eps >= 1.0) return 1;
  const double n = std::ceil(std::log(delta) / std::log1p(-eps));
  if (!(n <= static_cast<double>(kPlanMaxSamples))) return std::nullopt;
  return std::max<std::uint64_t>(1, static_cast<std::uint64_t>(n));
}

void CheckHoldoutRequest(const HoldoutPlanRequest& request, const std::string& prefix,
                         std::vector<FieldViolation>* violations) {
  CheckTarget(prefix, request.target_risk, violations);
  CheckProbabilityClosed(prefix + ".expected_risk", request.expected_risk, violations);
  CheckProbabilityOpen(prefix + ".failure_probability", request.failure_probability, violations);
  if (request.pass_probability.has_value()) {
    CheckProbabilityOpen(prefix + ".pass_probability", *request.pass_probability, violations);
  }
  CheckHeld(prefix, request.held_sample_count, violations);
}

// Checks a training plan request; resolves its capacity in `capacity` (a
// copy of the request's). Returns the family's row when it is a training-set
// family.
const FamilySpec* CheckTrainingRequest(const TrainingPlanRequest& request,
                                       const std::string& prefix, ClassCapacity* capacity,
                                       std::vector<FieldViolation>* violations) {
  const FamilySpec* spec = request.family.has_value() ? FindFamily(*request.family) : nullptr;
  if (spec == nullptr) {
    violations->push_back(
        {prefix + ".family", absl::StrCat("required: a training-set family (", TrainingFamilyNames(),
                                          "); unset, or a value this server does not know")});
  } else if (spec->capacity_measure == CapacityMeasure::kNone) {
    violations->push_back(
        {prefix + ".family",
         absl::StrCat(
             spec->family_name, " is not a training-set family (", TrainingFamilyNames(),
             "); plan a hold-out set with the hold-out planner (PlanSamplesRequest.holdout)")});
    spec = nullptr;
  }
  const bool resolved = ResolveCapacity(capacity, prefix + ".capacity", violations);
  if (spec != nullptr && resolved) {
    const bool has = spec->capacity_measure == CapacityMeasure::kVcDimension
                         ? capacity->vc_dimension.has_value()
                         : capacity->log_hypothesis_count.has_value();
    if (!has) {
      violations->push_back({prefix + ".capacity",
                             absl::StrCat(spec->family_name, " needs ", spec->evidence_needed)});
    }
  }
  CheckProbabilityClosed(prefix + ".expected_empirical_risk", request.expected_empirical_risk,
                         violations);
  CheckTarget(prefix, request.target_risk, violations);
  CheckProbabilityOpen(prefix + ".failure_probability", request.failure_probability, violations);
  CheckHeld(prefix, request.held_sample_count, violations);
  return spec;
}

}  // namespace

absl::StatusOr<HoldoutPlan> PlanHoldout(const HoldoutPlanRequest& request, const StopToken& stop,
                                        const std::string& prefix) {
  std::vector<FieldViolation> violations;
  CheckHoldoutRequest(request, prefix, &violations);
  if (!violations.empty()) return InvalidFields(violations);

  const double eps = request.target_risk;
  const double p = request.expected_risk;
  const double delta = request.failure_probability;
  HoldoutPlan plan;
  if (eps < 1.0) plan.zero_failure_sample_count = ZeroFailureSamples(eps, delta).value_or(0);
  if (eps >= 1.0 || p >= eps) {
    plan.reason = Unreachable(eps, p, "expected error rate");
    return plan;
  }
  if (plan.zero_failure_sample_count == 0) {
    // Even with no errors more than 2^53 samples are needed.
    plan.reason = kBeyondRange;
    return plan;
  }

  if (stop.StopRequested()) return stop.Status();
  // HoldoutUpper(n, k) <= eps, decided from one binomial tail where possible.
  const CountedBound ok(
      [&](std::uint64_t n, std::uint64_t k) { return UpperLimitAtMost(n, k, delta, eps); },
      &plan.bound_evaluation_count, stop);
  // No n below the zero-failure size can work: Binbar(n, k) >= Binbar(n, 0).
  // One below it guards against rounding in the closed form.
  const absl::StatusOr<std::uint64_t> n95 =
      RobustSmallest(p, std::max<std::uint64_t>(1, plan.zero_failure_sample_count - 1), ok);
  if (ok.stopped()) return stop.Status();
  if (ok.exhausted()) {
    plan.reason = kOverBudget;
    return plan;
  }
  if (!n95.ok()) {
    plan.reason = kBeyondRange;
    return plan;
  }
  // The bisection's answer can be a later crossing of the sawtooth: the
  // sizes below it are classified down to the zero-failure size.
  std::uint64_t rate_checked_down_to = 0;
  WorkBudget rate_budget(kMinimalityBudgetSeconds);
  const std::uint64_t n_rate = SmallestRobustHoldout(
      p, eps, delta, std::max<std::uint64_t>(1, plan.zero_failure_sample_count - 1), *n95, ok,
      &rate_budget, &rate_checked_down_to);
  if (ok.stopped()) return stop.Status();
  if (ok.exhausted()) {
    plan.reason = kOverBudget;
    return plan;
  }
  plan.expected_rate_sample_count = n_rate;
  plan.sample_count = n_rate;
  plan.rule = AnticipatedRateRule("exact binomial (Clopper-Pearson) bound", "n", p, eps,
                                  "Clopper & Pearson 1934; exact integer search");
  if (rate_checked_down_to != 0) {
    plan.rule = absl::StrCat(
        plan.rule, "; every smaller n down to ", rate_checked_down_to,
        " was checked, smaller ones were not within the work budget, so an earlier n "
        "meeting the rule below that is possible");
  }

  // k_max(n) = max { k : Binbar(n, k) <= eps }, given a count `known` that
  // certifies eps at n (so k_max >= known); the search runs upward from it.
  // Binbar(n, n) = 1 > eps bounds it.
  const auto k_max = [&](std::uint64_t n, std::uint64_t known) {
    const absl::StatusOr<std::uint64_t> first_bad = SmallestSatisfying(
        known + 1, n, [&](std::uint64_t k) { return !ok(n, k); });
    return first_bad.ok() ? *first_bad - 1 : known;
  };
  std::uint64_t tolerated = k_max(n_rate, ErrorsAt(p, n_rate));

  if (request.pass_probability.has_value()) {
    const double target = *request.pass_probability;
    // s_K: the smallest n at which K errors still certify eps; it grows with
    // K. k_max is constant on [s_K, s_{K+1}) and P(pass) falls there, so the
    // smallest n with P(pass) >= target is s_K for the first K whose
    // P(pass at s_K) reaches it. Known s values bracket new ones (s_K is
    // monotone in K), and Binbar(n, K) >= K/n gives s_K >= K/eps.
    std::map<std::uint64_t, std::uint64_t> s_known;
    const auto first_feasible = [&](std::uint64_t k) -> absl::StatusOr<std::uint64_t> {
      if (auto it = s_known.find(k); it != s_known.end()) return it->second;
      std::uint64_t lo = k + 1;
      // Binbar(n, K) >= K/n holds for delta <= 1/2 only (the median of
      // Bin(n, K/n) is K: Kaas & Buhrman 1980).
      const double by_rate = std::ceil(static_cast<double>(k) / eps);
      if (delta <= 0.5 && by_rate < static_cast<double>(kPlanMaxSamples)) {
        lo = std::max(lo, static_cast<std::uint64_t>(by_rate));
      }
      std::uint64_t hi = kPlanMaxSamples;
      // Guess s_K by a straight line through the two nearest known points
      // (interpolation when K lies between them), else start from lo.
      std::vector<std::pair<double, double>> near;
      auto above = s_known.upper_bound(k);
      if (above != s_known.end()) hi = above->second;
      auto below = above;
      if (below != s_known.begin()) {
        --below;
        lo = std::max(lo, below->second);
        near.emplace_back(static_cast<double>(below->first),
                          static_cast<double>(below->second));
        if (above == s_known.end() && below != s_known.begin()) {
          const auto second = std::prev(below);
          near.emplace_back(static_cast<double>(second->first),
                            static_cast<double>(second->second));
        }
      }
      if (above != s_known.end()) {
        near.emplace_back(static_cast<double>(above->first),
                          static_cast<double>(above->second));
      }
      lo = std::min(lo, hi);
      std::uint64_t guess = lo;
      if (near.size() == 2) {
        const auto [k1, s1] = near[0];
        const auto [k2, s2] = near[1];
        const double g = s1 + (s2 - s1) / (k2 - k1) * (static_cast<double>(k) - k1);
        if (g > static_cast<double>(lo) && g < static_cast<double>(hi)) {
          guess = static_cast<std::uint64_t>(g);
        }
      }
      const Predicate feasible = [&](std::uint64_t n) { return ok(n, k); };
      absl::StatusOr<std::uint64_t> s = SmallestSatisfying(lo, hi, feasible, guess);
      if (!s.ok() && hi < kPlanMaxSamples) {
        // Beyond ~1e13 samples Boost's inversion gives way to the (larger)
        // kl-Chernoff bound for some counts and not others, so the bracket
        // from a neighbouring count can fail; search the full range then.
        s = SmallestSatisfying(lo, kPlanMaxSamples, feasible);
      }
      if (s.ok()) s_known[k] = *s;
      return s;
    };
    const Predicate passes = [&](std::uint64_t k) {
      if (ok.spent()) return true;  // stopped or over budget: wind down at once
      const absl::StatusOr<std::uint64_t> s = first_feasible(k);
      // A count whose s_K lies beyond the range stops the search upward; the
      // final check below reports it as unreachable if it is the answer.
      if (!s.ok()) return true;
      bool unused = true;
      return BinomialTailLowerBound(*s, k_max(*s, k), p, BinomialTail::kAtMost, &unused) >= target;
    };
    // Search K outward from the 9.5 answer's tolerated count: exponential
    // steps, then bisection. NOTE: beyond ~1e8 samples P(pass at s_K) is not
    // exactly monotone in K at the finest scale (s_K moves by ~1/eps with
    // rounding jitter), so the answer is an s_K that reaches the request while
    // the previous tooth start falls short, possibly not the very first one.
    const std::uint64_t guess = tolerated;
    const std::uint64_t k_limit =
        static_cast<std::uint64_t>(eps * static_cast<double>(kPlanMaxSamples)) + 1;
    const absl::StatusOr<std::uint64_t> k_star = SmallestSatisfying(0, k_limit, passes, guess);
    const absl::StatusOr<std::uint64_t> s_star =
        k_star.ok() ? first_feasible(*k_star) : k_star;
    if (ok.stopped()) return stop.Status();
    if (ok.exhausted()) {
      plan.reason = kOverBudget;
      plan.sample_count = 0;
      return plan;
    }
    if (!s_star.ok()) {
      plan.reason = kBeyondRange;
      plan.sample_count = 0;
      return plan;
    }
    // The bisection over K stops at a crossing (P(pass at s_K) >= target,
    // at s_{K-1} not), but P(pass at s_K) is not monotone in K, so an
    // earlier tooth may pass too. Every n below s_{K*} is checked, downward
    // from the crossing, by blocks of teeth [lo, hi]: for n in [s_lo,
    // s_{hi+1}), k_max(n) <= hi and n >= s_lo, so P(pass at n) <= P(Bin(s_lo,
    // p) <= hi); a block whose bound is below the target holds no passing n.
    // Blocks double while they are ruled out and halve when not; a single
    // tooth that cannot be ruled out is evaluated (its start passes when the
    // tail's lower bound reaches the target). The blocks grow by a factor
    // of about eps/p per step away from the crossing, so a few dozen
    // searches cover every K down to 0 unless p is within a hair of eps.
    std::uint64_t best = k_star.ok() ? *k_star : 0;
    // The smallest K such that every tooth from K up was checked.
    std::uint64_t checked_from = best;
    if (k_star.ok() && s_star.ok() && *k_star > 0) {
      WorkBudget minimality_budget(kMinimalityBudgetSeconds);
      std::int64_t hi = static_cast<std::int64_t>(*k_star) - 1;
      std::uint64_t block = 1;
      while (hi >= 0 && !ok.nearly_spent() && !minimality_budget.Spent()) {
        const std::uint64_t top = static_cast<std::uint64_t>(hi);
        const std::uint64_t lo = top + 1 > block ? top + 1 - block : 0;
        const absl::StatusOr<std::uint64_t> s_lo = first_feasible(lo);
        if (ok.spent() || !s_lo.ok()) break;
        bool unused = true;
        // An upper bound on P(Bin(s_lo, p) <= top): one minus a lower
        // bound on the complement P(Bin(s_lo, p) >= top + 1).
        const double bound =
            top >= *s_lo ? 1.0
                         : 1.0 - BinomialTailLowerBound(*s_lo, top + 1, p,
                                                        BinomialTail::kAtLeast, &unused);
        if (bound < target) {
          checked_from = lo;
          if (lo == 0) break;
          hi = static_cast<std::int64_t>(lo) - 1;
          block = block > kPlanMaxSamples / 2 ? block : 2 * block;
          continue;
        }
        if (block > 1) {
          block /= 2;
          continue;
        }
        // One tooth, K = top = lo: its start passes when its own tooth is
        // not empty (s_{K+1} > s_K) and P(Bin(s_K, p) <= K) reaches the target.
        const absl::StatusOr<std::uint64_t> s_next = first_feasible(top + 1);
        if (ok.spent()) break;
        if (s_next.ok() && *s_next > *s_lo &&
            BinomialTailLowerBound(*s_lo, top, p, BinomialTail::kAtMost, &unused) >= target) {
          best = top;
        }
        checked_from = top;
        hi -= 1;
      }
    }
    if (ok.stopped()) return stop.Status();
    if (ok.exhausted()) {
      plan.reason = kOverBudget;
      plan.sample_count = 0;
      return plan;
    }
    const std::uint64_t good = best;
    const absl::StatusOr<std::uint64_t> s_best = first_feasible(best);
    if (!s_best.ok()) {
      plan.reason = kBeyondRange;
      plan.sample_count = 0;
      return plan;
    }
    const std::uint64_t n96 = *s_best;
    plan.pass_probability_sample_count = n96;
    plan.sample_count = n96;
    tolerated = k_max(n96, good);
    if (ok.stopped()) return stop.Status();
    if (ok.exhausted()) {
      plan.reason = kOverBudget;
      plan.sample_count = 0;
      return plan;
    }
    // Where the check of the earlier teeth ran out of its budget, the rule
    // says from which n up it holds.
    const std::uint64_t checked_from_n =
        checked_from == 0 ? 0 : first_feasible(checked_from).value_or(n96);
    const std::string definition = absl::StrCat(
        "P(Bin(n, ", Shortest(p), ") <= k_max(n)) >= ", Shortest(target),
        ", where k_max(n) is the most errors at which the exact binomial bound on n "
        "examples is <= ",
        Shortest(eps), ": the probability that a model with true error rate ", Shortest(p),
        " passes (a power calculation");
    constexpr char kSources[] = " (Clopper & Pearson 1934; exact integer search)";
    if (checked_from_n == 0) {
      plan.rule = absl::StrCat("smallest n with ", definition,
                               "; every smaller n was checked, since the pass probability "
                               "is a sawtooth in n)",
                               kSources);
    } else {
      plan.rule = absl::StrCat(
          "an n with ", definition,
          ") found by bisection over the teeth of the sawtooth (the sizes s_K from which K "
          "errors certify), the tooth before it falling short; ",
          checked_from_n < n96
              ? absl::StrCat("every smaller n down to ", checked_from_n,
                             " was checked too, smaller ones were not")
              : std::string("smaller n were not checked"),
          " within the work budget, so an earlier crossing below that is possible",
          kSources);
    }
    plan.notes.emplace_back(
        "the pass probability is a sawtooth in n: a few samples more than planned can "
        "lower it until the hold-out set tolerates one more error");
  }

  plan.reachable = true;
  plan.tolerated_error_count = tolerated;
  if (stop.StopRequested()) return stop.Status();
  bool exact = true;
  HoldoutUpper(plan.sample_count, plan.tolerated_error_count, delta, &exact);
  plan.pass_probability_at_plan =
      BinomialTailLowerBound(plan.sample_count, plan.tolerated_error_count, p,
                             BinomialTail::kAtMost, &exact);
  plan.additional_sample_count = plan.sample_count > request.held_sample_count
                                     ? plan.sample_count - request.held_sample_count
                                     : 0;
  if (!exact) {
    plan.notes.emplace_back(
        "at this size the exact binomial computations did not converge; the "
        "kl-Chernoff relaxations (conservative) stood in, as they do in certificates");
  }
  return plan;
}

absl::StatusOr<TrainingPlan> PlanTraining(const TrainingPlanRequest& request, const StopToken& stop,
                                          const std::string& prefix) {
  std::vector<FieldViolation> violations;
  ClassCapacity capacity = request.capacity;
  const FamilySpec* spec = CheckTrainingRequest(request, prefix, &capacity, &violations);
  if (!violations.empty()) return InvalidFields(violations);
  const bool uses_vc = spec->capacity_measure == CapacityMeasure::kVcDimension;

  const double eps = request.target_risk;
  const double r = request.expected_empirical_risk;
  const double delta = request.failure_probability;
  TrainingPlan plan;
  plan.family = spec->family;
  plan.notes.push_back(
      r > 0.0 ? absl::StrFormat(
                    "the bound is evaluated at m samples with ceil(%g m) training errors (at "
                    "least the anticipated count), through the %s family as a certificate "
                    "would be",
                    r, std::string(spec->family_name))
              : absl::StrFormat(
                    "the bound is evaluated at m samples with no training errors, through the "
                    "%s family as a certificate would be",
                    std::string(spec->family_name)));

  // Comparisons from the literature (different guarantees; see plan.h).
  const auto fits = [](double m) -> std::optional<std::uint64_t> {
    if (!(m <= static_cast<double>(kPlanMaxSamples))) return std::nullopt;
    return std::max<std::uint64_t>(1, static_cast<std::uint64_t>(std::ceil(m)));
  };
  if (eps < 1.0) {
    if (uses_vc) {
      const double h = static_cast<double>(*capacity.vc_dimension);
      // Blumer, Ehrenfeucht, Haussler & Warmuth (1989), Thm 2.1(ii)(b).
      plan.realizable_sample_count =
          fits(std::max(4.0 / eps * std::log2(2.0 / delta), 8.0 * h / eps * std::log2(13.0 / eps)));
      // Vapnik's VC confidence term (our conservative form, +1/m) <= eps/2.
      // Falls in m for m > h/2 and exceeds 1 below, so the predicate is monotone.
      if (stop.StopRequested()) return stop.Status();
      const absl::StatusOr<std::uint64_t> agn =
          SmallestSatisfying(1, kPlanMaxSamples, [&](std::uint64_t m) {
            const double md = static_cast<double>(m);
            return VcConfidence(h, md, delta) + 1.0 / md <= eps / 2.0;
          });
      if (agn.ok()) plan.agnostic_sample_count = *agn;
      plan.notes.emplace_back(
          "comparison only, realizable case: the Blumer, Ehrenfeucht, Haussler & Warmuth "
          "(1989, Theorem 2.1) sample size at which a learner with no training errors "
          "reaches true error <= target; a different guarantee from this plan's");
      plan.notes.emplace_back(
          "comparison only, agnostic case: the smallest m at which Vapnik's VC confidence "
          "term (with its +1/m) is <= target/2, so that empirical risk minimization lands "
          "within the target of the best model in the class (Vapnik 1998, ch. 4)");
      plan.notes.emplace_back(
          "VC bounds fall with m only once m > h/2; below that they are vacuous");
    } else {
      const double log_h = *capacity.log_hypothesis_count;
      // Shalev-Shwartz & Ben-David (2014), Cor. 2.3 and Cor. 4.6.
      plan.realizable_sample_count = fits((log_h - std::log(delta)) / eps);
      plan.agnostic_sample_count = fits(2.0 * (log_h + std::log(2.0 / delta)) / (eps * eps));
      plan.notes.emplace_back(
          "comparison only, realizable case: ceil((ln|H| + ln(1/delta)) / target), the "
          "sample size at which a hypothesis of a finite class with no training errors "
          "reaches true error <= target (Blumer, Ehrenfeucht, Haussler & Warmuth 1987; "
          "Shalev-Shwartz & Ben-David 2014, Corollary 2.3)");
      plan.notes.emplace_back(
          "comparison only, agnostic case: ceil(2 (ln|H| + ln(2/delta)) / target^2), at "
          "which empirical risk minimization lands within the target of the best model in "
          "the class (Shalev-Shwartz & Ben-David 2014, Corollary 4.6)");
    }
  }

  plan.notes.insert(plan.notes.end(), capacity.notes.begin(), capacity.notes.end());
  if (eps >= 1.0 || r >= eps) {
    plan.reason = Unreachable(eps, r, "expected empirical risk");
    return plan;
  }
  const CountedBound ok(
      [&](std::uint64_t m, std::uint64_t k) {
        Evidence e;
        e.training = TrainingEvidence{{k, m}, capacity};
        return spec->compute(e, delta).risk_upper_bound <= eps;
      },
      &plan.bound_evaluation_count, stop);
  const absl::StatusOr<std::uint64_t> m = RobustSmallest(r, 1, ok);
  if (ok.stopped()) return stop.Status();
  if (ok.exhausted()) {
    plan.reason = kOverBudget;
    return plan;
  }
  if (!m.ok()) {
    plan.reason = kBeyondRange;
    return plan;
  }
  plan.reachable = true;
  plan.sample_count = *m;
  plan.rule = AnticipatedRateRule(absl::StrCat(spec->family_name, " bound"), "m", r, eps,
                                  absl::StrCat(spec->source, "; exact integer search"));
  plan.additional_sample_count = plan.sample_count > request.held_sample_count
                                     ? plan.sample_count - request.held_sample_count
                                     : 0;
  return plan;
}

}  // namespace riskbound::core

namespace riskbound::core {

absl::Status ValidatePlanSamplesRequest(const PlanSamplesRequest& request) {
  std::vector<FieldViolation> violations;
  if (request.holdout.has_value() == request.training.has_value()) {
    violations.push_back({"plan", request.holdout.has_value()
                                      ? "give holdout or training, not both"
                                      : "required: give holdout (a hold-out set) or training "
                                        "(a training sample)"});
  } else if (request.holdout.has_value()) {
    CheckHoldoutRequest(*request.holdout, "holdout", &violations);
  } else {
    ClassCapacity capacity = request.training->capacity;
    CheckTrainingRequest(*request.training, "training", &capacity, &violations);
  }
  return InvalidFields(violations);
}

absl::StatusOr<PlanSamplesResult> PlanSamples(const PlanSamplesRequest& request,
                                              const StopToken& stop) {
  if (absl::Status valid = ValidatePlanSamplesRequest(request); !valid.ok()) return valid;
  PlanSamplesResult result;
  if (request.holdout.has_value()) {
    absl::StatusOr<HoldoutPlan> plan = PlanHoldout(*request.holdout, stop, "holdout");
    if (!plan.ok()) return plan.status();
    result.holdout = *std::move(plan);
  } else {
    absl::StatusOr<TrainingPlan> plan = PlanTraining(*request.training, stop, "training");
    if (!plan.ok()) return plan.status();
    result.training = *std::move(plan);
  }
  return result;
}

}  // namespace riskbound::core
