// Sample-size planning: how many hold-out or training examples make a bound
// reach a target risk.
//
// Every answer is found by exact integer search over the bound the service
// itself would report (numeric.h SmallestSatisfying: exponential search, then
// bisection; logarithmic in the answer), never by an asymptotic formula; the
// closed-form sample sizes of the literature are given beside it as labelled
// comparisons. Answers cover sample sizes up to kPlanMaxSamples = 2^53
// (about 9.0e15); a target that needs more is reported unreachable.
//
// Anticipated errors. A plan at an anticipated error rate r evaluates the bound
// at n samples with k(n) = ceil(r n) errors (r n in double precision): the
// bound for at least the anticipated count, never rounded down. Because k(n)
// steps up by one every ~1/r samples, n -> bound(n, k(n)) is a sawtooth: it
// falls while k stays fixed and jumps up when k grows. A plain "first n with
// bound <= target" can be followed by failures, so the plans take the smallest
// n from which the bound stays <= target for a further window of ceil(2/r)
// samples (the count grows by one every ~1/r samples, so such a window holds
// about two more errors). Within a tooth the bound falls, so the
// window is checked at n and at each tooth start (first n' with a larger
// k(n')) inside it. At the answer n the bound is <= target and at n - 1 it is
// above it. The rule is not monotone in n, so the hold-out planner checks
// every smaller n after its search (SmallestRobustHoldout in plan.cc) and
// returns the first that meets it; the training planner returns the
// search's answer.
#ifndef RISKBOUND_SERVICE_CORE_PLAN_H_
#define RISKBOUND_SERVICE_CORE_PLAN_H_

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "service/core/certify.h"
#include "service/core/evidence.h"
#include "service/core/stop.h"

namespace riskbound::core {

// The largest sample size a plan searches: 2^53, where counts are exact
// doubles (the largest count Certify accepts).
inline constexpr std::uint64_t kPlanMaxSamples = kMaxSampleCount;

// API: HoldoutPlanRequest.
struct HoldoutPlanRequest {
  // epsilon: the risk the exact binomial (Clopper-Pearson) bound must reach.
  // In (0, 1); 1 or more is reported unreachable (no bound says anything there).
  double target_risk = 0.05;
  // p: the error rate the caller expects the model to show, in [0, 1].
  // 0 plans for no errors at all.
  double expected_risk = 0.0;
  // Failure probability of the bound, in (0, 1).
  double failure_probability = 0.05;
  // If set, in (0, 1): plan for this probability that the bound will in fact
  // reach the target when the true error rate is p (a power calculation).
  std::optional<double> pass_probability;
  // Hold-out examples the caller already has (for additional_sample_count).
  std::uint64_t held_sample_count = 0;
};

// API: PlanSamplesResponse with HoldoutPlanDetail.
struct HoldoutPlan {
  // False when no sample size up to kPlanMaxSamples reaches the target;
  // samples, tolerated_error_count and additional_sample_count are then 0 (the other
  // fields are filled where they can be computed).
  bool reachable = false;
  // Why the target cannot be reached, in plain words (empty when reachable).
  std::string reason;
  // The plan: without pass_probability, expected_rate_sample_count; with it,
  // pass_probability_sample_count.
  std::uint64_t sample_count = 0;
  // k_max(samples) = max { k : Binbar(samples, k, delta) <= target }: the most
  // errors the hold-out set may show and still certify the target.
  std::uint64_t tolerated_error_count = 0;
  // ceil(ln delta / ln(1 - target)): enough when no error at all is expected
  // (Clopper & Pearson 1934 at zero errors; Hanley & Lippman-Hand 1983).
  // 0 when beyond 2^53.
  std::uint64_t zero_failure_sample_count = 0;
  // max(0, samples - held_sample_count).
  std::uint64_t additional_sample_count = 0;
  // P(Bin(samples, p) <= tolerated_error_count): the probability that a model with
  // true error rate p passes at the planned size.
  double pass_probability_at_plan = 0.0;
  // Smallest n with Binbar(n, ceil(p n), delta) <= target, robust to the
  // sawtooth (see the file comment).
  std::uint64_t expected_rate_sample_count = 0;
  // With pass_probability: smallest n with P(pass at n) = P(Bin(n, p) <=
  // k_max(n)) >= pass_probability (a power calculation). The pass
  // probability is itself a sawtooth in n (it falls while k_max stays put),
  // so a bisection over the teeth can stop at a later crossing: every
  // earlier tooth is ruled out by the bound P(pass at n) <= P(Bin(s_lo, p)
  // <= hi) for n in a block of teeth [lo, hi], or evaluated on its own.
  // Where that check would exceed its share of the work budget, the rule
  // text names the n from which it holds. It can dip below the request
  // again for a few samples after this n.
  std::optional<std::uint64_t> pass_probability_sample_count;
  // Which rule set `samples`, in plain words.
  std::string rule;
  // Remarks (relaxations used, sawtooth warnings).
  std::vector<std::string> notes;
  // Bound evaluations the searches used (a cost figure; logarithmic in n).
  std::uint64_t bound_evaluation_count = 0;
};

// PlanHoldout
// Plans the size of a hold-out set for the exact binomial bound
// (HoldoutExactBinomial: Clopper & Pearson 1934).
// Returns OK with reachable = false and a reason when target_risk >= 1,
// expected_risk >= target_risk, the answer exceeds kPlanMaxSamples, or the
// searches would take more than their work budget (80 ms of CPU, the checks
// that no smaller n meets the rule included; with the final evaluations a
// call stays under 100 ms):
// only an expected rate within a hair of the target, whose answer lies above
// about 10^12 with a pass probability or near 2^53 without.
// Errors: INVALID_ARGUMENT naming every bad field at once under `prefix`
// (the request's path: "holdout" in PlanSamples): <prefix>.target_risk (NaN,
// <= 0), .expected_risk (NaN, outside [0, 1]), .failure_probability (outside
// (0, 1)), .pass_probability (outside (0, 1)), .held_sample_count (> 2^53).
// Stops early when `stop` does and returns its status (CANCELLED or
// DEADLINE_EXCEEDED), never a partial plan.
// Never returns NaN or Inf. Thread-safe; no shared state.
absl::StatusOr<HoldoutPlan> PlanHoldout(const HoldoutPlanRequest& request,
                                        const StopToken& stop = StopToken::Never(),
                                        const std::string& prefix = "holdout");

// API: TrainingPlanRequest.
struct TrainingPlanRequest {
  // A training-set family (FamilySpec::capacity_measure set): kVcAdditive,
  // kVcRelative, kOccamHoeffding or kOccamKl. Required: nullopt (unset, or a
  // value this server does not know) is refused.
  std::optional<Family> family;
  // The capacity of the class, in the measure the family reads (or one that
  // resolves to it: hypothesis_count, a model description).
  ClassCapacity capacity;
  // The training error rate the caller expects, in [0, 1].
  double expected_empirical_risk = 0.0;
  // epsilon, in (0, 1); 1 or more is reported unreachable.
  double target_risk = 0.1;
  // Failure probability, in (0, 1).
  double failure_probability = 0.05;
  std::uint64_t held_sample_count = 0;
};

// API: PlanSamplesResponse with TrainingPlanDetail.
struct TrainingPlan {
  bool reachable = false;
  std::string reason;
  // Which rule set sample_count, in plain words (empty when unreachable).
  std::string rule;
  // The family planned for.
  Family family = Family::kVcAdditive;
  // Smallest m with family bound(m, ceil(r m)) <= target, robust to the
  // sawtooth (see the file comment), by exact integer search.
  std::uint64_t sample_count = 0;
  std::uint64_t additional_sample_count = 0;
  // Comparison only (a different guarantee: a consistent learner reaches
  // error <= target with probability >= 1 - delta): VC families, Blumer,
  // Ehrenfeucht, Haussler & Warmuth (1989) Thm 2.1(ii)(b); finite classes,
  // ceil((ln|H| + ln(1/delta)) / target) (Blumer et al. 1987;
  // Shalev-Shwartz & Ben-David 2014, Cor. 2.3). Unset beyond 2^53.
  std::optional<std::uint64_t> realizable_sample_count;
  // Comparison only (ERM within target of the best in the class): finite
  // classes, ceil(2 (ln|H| + ln(2/delta)) / target^2) (Shalev-Shwartz &
  // Ben-David 2014, Cor. 4.6); VC families, the smallest m with Vapnik's VC
  // confidence term (with its +1/m, Vapnik 1998 ch. 4) <= target/2.
  std::optional<std::uint64_t> agnostic_sample_count;
  // Remarks: the counting convention, regime warnings, what the comparison
  // sizes mean, where the capacity came from (ClassCapacity::notes).
  std::vector<std::string> notes;
  std::uint64_t bound_evaluation_count = 0;
};

// PlanTraining
// Plans the training-sample size at which a training-set family's bound at
// the anticipated empirical risk reaches the target. The bound is the
// registered family's own computation (families.h), so the answer agrees with
// a Certify call at (ceil(r m) errors, m samples).
// Returns OK with reachable = false and a reason when target_risk >= 1,
// expected_empirical_risk >= target_risk, the answer exceeds
// kPlanMaxSamples, or the search would exceed the 100 ms CPU work budget.
// Errors: INVALID_ARGUMENT naming every bad field at once under `prefix`
// ("training" in PlanSamples): <prefix>.family (unset, unknown or not a
// training-set family), <prefix>.capacity (missing, or not the measure the
// family uses) and what ResolveCapacity (certify.h) names under it,
// .expected_empirical_risk, .target_risk, .failure_probability,
// .held_sample_count.
// Stops early when `stop` does and returns its status (CANCELLED or
// DEADLINE_EXCEEDED), never a partial plan.
// Never returns NaN or Inf. Thread-safe; no shared state.
absl::StatusOr<TrainingPlan> PlanTraining(const TrainingPlanRequest& request,
                                          const StopToken& stop = StopToken::Never(),
                                          const std::string& prefix = "training");

// API: PlanSamplesRequest, whose `plan` oneof sets exactly one of the two.
struct PlanSamplesRequest {
  std::optional<HoldoutPlanRequest> holdout;
  std::optional<TrainingPlanRequest> training;
};

// API: PlanSamplesResponse: the plan of the kind requested.
struct PlanSamplesResult {
  std::optional<HoldoutPlan> holdout;
  std::optional<TrainingPlan> training;
};

// ValidatePlanSamplesRequest
// Returns OK, or INVALID_ARGUMENT naming every bad field at once by its API
// path: "plan" when neither kind (or both) is given, else the checks of
// PlanHoldout under "holdout" or PlanTraining under "training".
absl::Status ValidatePlanSamplesRequest(const PlanSamplesRequest& request);

// PlanSamples
// The plan of the kind requested: PlanHoldout or PlanTraining, with the
// errors of ValidatePlanSamplesRequest. Thread-safe.
absl::StatusOr<PlanSamplesResult> PlanSamples(const PlanSamplesRequest& request,
                                              const StopToken& stop = StopToken::Never());

}  // namespace riskbound::core

#endif  // RISKBOUND_SERVICE_CORE_PLAN_H_
