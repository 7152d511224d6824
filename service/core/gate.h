// The promotion gate: PROMOTE, HOLD or REJECT a candidate model from its
// evidence, a policy fixed in advance, and (optionally) a comparison with the
// model now in service (the champion).
//
// Start here for the gate's decision logic. The comparison statistics live in
// paired.h, the bounds in holdout.h / vc.h / finite_class.h (via the registry
// in families.h), the hold-out planning in plan.h.
//
// Failure-probability (delta) accounting. Every confidence statement the
// verdict rests on gets an explicit share of policy.failure_probability, listed in
// GateDecision::delta_ledger; the shares sum to at most policy.failure_probability, so by
// the union bound (Bonferroni; Boole's inequality) ALL the reported bounds hold
// together with probability >= 1 - policy.failure_probability. The split depends only on
// the policy and on which kinds of evidence are present (never on their
// values), so it is fixed before the data is seen:
//
//   without a champion                 with a champion
//   risk upper bound    delta/2        risk upper bound        delta/4
//   risk lower bound    delta/2        risk lower bound        delta/4
//                                      difference upper bound  delta/4
//                                      difference lower bound  delta/4
//
//  * With slice limits (policy.max_slice_risk, policy.slice_max_risks) the
//    slices are one more part: delta is first split into equal parts (risk;
//    the champion comparison when given; the slices), each rounded down, and
//    each part is halved as above. The slices' part is shared between the G
//    slices by policy.slice_sharing (slices.h: Bonferroni, delta_part / G or
//    weighted; or Sidak, 1 - (1 - delta_part)^(1/G)); each slice spends its
//    share on a one-sided upper and a one-sided lower bound, half each.
//    Under Sidak the slices' entries combine as 1 - prod(1 - share), which
//    the spent total uses.
//  * The risk upper bound is the tightest of the K policy families that apply
//    to the candidate's evidence, each computed at (its share)/K (the minimum
//    over K bounds needs the union bound).
//  * The risk lower bound is the one-sided Clopper-Pearson lower limit on the
//    hold-out counts. Without hold-out counts there is no lower bound (a
//    training-set bound cannot show that a model is bad); its share then goes
//    to the upper bound.
//  * Each difference bound is a Bonferroni Clopper-Pearson pair (paired.h), so
//    its share is again halved between the two binomial limits it uses.
//  * Upper and lower bounds on the same quantity form a two-sided interval:
//    a two-sided interval spends delta/2 on each side (common practice).
//  * The McNemar p-value is reported for information only: no verdict rule
//    uses it, so it spends no delta.
//
// Consequence for errors of the gate: a model whose true error exceeds
// max_risk is PROMOTED with probability at most the risk-upper share; a model
// whose true error is at most max_risk is REJECTED on risk with probability
// at most the risk-lower share; likewise for the champion comparison.
#ifndef RISKBOUND_SERVICE_CORE_GATE_H_
#define RISKBOUND_SERVICE_CORE_GATE_H_

#include <cstdint>
#include <optional>
#include <string>
#include <utility>
#include <vector>

#include "absl/status/statusor.h"
#include "service/core/evidence.h"
#include "service/core/field_violation.h"
#include "service/core/paired.h"
#include "service/core/slices.h"
#include "service/core/stop.h"

namespace riskbound::core {

// One slice's limit. API: SliceMaxRisk; paths
// policy.slice_max_risks[i].{slice_name, max_risk}.
struct SliceMaxRisk {
  std::string slice_name;
  double max_risk = 0.0;
};

// The rules a candidate must pass, fixed before its evidence is seen.
// API field paths: policy.max_risk, policy.failure_probability (= delta),
// policy.allowed_families[i], policy.min_holdout_sample_count,
// policy.max_regression, policy.plan_pass_probability.
struct GatePolicy {
  // epsilon: the highest tolerated true error, in (0, 1).
  double max_risk = 0.05;
  // delta: the failure probability of the whole verdict, in (0, 1).
  double failure_probability = 0.05;
  // The bound families the risk upper bound may use. Those that apply to the
  // candidate's evidence are used (union bound over them); at least one must
  // apply. Empty: the hold-out exact binomial (Clopper-Pearson) only, the
  // recommended gate bound. nullopt stands for an entry that names no family
  // (the API's BOUND_FAMILY_UNSPECIFIED, or a value this server does not
  // know); DecideGate refuses it at its position.
  std::vector<std::optional<Family>> allowed_families;
  // Fewer hold-out samples than this: HOLD (more data needed), whatever the
  // bounds say. 0: no minimum.
  std::uint64_t min_holdout_sample_count = 0;
  // Tolerated R(challenger) - R(champion) when a champion is given, in
  // [-1, 1]: 0 = not worse than the champion; 0.01 = at most one point worse;
  // negative = better by at least that much. Unset with a champion: 0.
  std::optional<double> max_regression;
  // Probability, in (0, 1), with which the planned extra hold-out samples of
  // a HOLD should settle the verdict (a power calculation, plan.h). nullopt:
  // kDefaultPlanPassProbability.
  std::optional<double> plan_pass_probability;
  // Sequential mode: every hold-out bound is anytime-valid (anytime.h), so
  // re-running the gate on a growing hold-out set keeps both promises.
  // allowed_families may then name no fixed-size hold-out family; empty
  // means holdout-anytime.
  bool sequential = false;
  // Slice limits (slices.h): every slice of candidate.evidence.slices must
  // clear its limit, slice_max_risks[i] for the slices it names and
  // max_slice_risk for the rest, each in (0, 1). With a limit the candidate
  // must have slices; slices without limits are refused.
  std::optional<double> max_slice_risk;
  std::vector<SliceMaxRisk> slice_max_risks;
  // How the slices share their failure probability.
  SliceSharing slice_sharing;
};

// The plan pass probability used when the policy leaves it unset.
inline constexpr double kDefaultPlanPassProbability = 0.8;

// The model asking for promotion. API paths: candidate.id, candidate.evidence.*
struct GateCandidate {
  std::string id;
  Evidence evidence;
};

// The model in service, and how the two were compared. Exactly one of paired
// and champion_holdout is set. API paths: champion.champion_id,
// champion.paired.*, champion.champion_holdout.*
struct ChampionComparison {
  std::string champion_id;
  // Both models scored on the same hold-out set as the candidate's
  // evidence.holdout (when that is given, the counts must agree with it).
  std::optional<PairedCounts> paired;
  // Unpaired: the champion's errors on its own hold-out set; the candidate's
  // evidence.holdout is then required. Weaker than paired (paired.h).
  std::optional<SampleCounts> champion_holdout;
};

// API: Verdict.
enum class Verdict {
  kPromote = 1,
  kHold = 2,
  kReject = 3,
};

// One confidence statement of a verdict and the failure probability it
// spent. API: DeltaSpend.
struct DeltaSpend {
  DeltaSpend() = default;
  DeltaSpend(std::string test_in, double failure_probability_in, std::string slice_name_in = {})
      : test(std::move(test_in)),
        failure_probability(failure_probability_in),
        slice_name(std::move(slice_name_in)) {}
  // The statement, in plain words ("risk upper bound: holdout-binomial").
  std::string test;
  double failure_probability = 0.0;
  // A slice's entry (its upper and lower bounds together): the slice's name.
  std::string slice_name;
};

// Where one slice stands against its limit. API: SliceOutcome.
enum class SliceOutcome {
  // Upper bound at or below the limit.
  kClears = 1,
  // Lower bound above the limit.
  kExceeds = 2,
  // Neither.
  kUndecided = 3,
};

// One slice of a verdict. API: SliceCheck.
struct SliceCheck {
  std::string slice_name;
  SliceOutcome outcome = SliceOutcome::kUndecided;
  double max_risk = 0.0;
  std::uint64_t error_count = 0;
  std::uint64_t sample_count = 0;
  // Each at half of failure_probability.
  double risk_upper_bound = 1.0;
  double risk_lower_bound = 0.0;
  // The slice's share of the verdict's failure probability.
  double failure_probability = 0.0;
  // Undecided only, when a plan exists: more labelled samples from the slice.
  std::optional<std::uint64_t> additional_sample_count;
  std::string reason;
};

// API: GateResponse (the audit record's digest, timestamp and engine version
// are the caller's).
struct GateDecision {
  Verdict verdict = Verdict::kHold;
  // Why, in plain words, each naming the numbers it compares. The first
  // reason states the verdict's deciding rule.
  std::vector<std::string> reasons;
  // The tightest risk upper bound (the one the verdict used). Its
  // risk_lower_bound is cleared: the gate's lower bound is risk_lower_bound
  // below.
  Certificate risk_certificate;
  // Clopper-Pearson lower limit on the true error (hold-out evidence only).
  std::optional<double> risk_lower_bound;
  // Limits on Delta = R(candidate) - R(champion) (champion given).
  std::optional<double> difference_upper_bound;
  std::optional<double> difference_lower_bound;
  // Exact one-sided McNemar p-value (paired champion comparison only);
  // informational, spends no delta.
  std::optional<double> mcnemar_p_value;
  // HOLD only, when a plan exists: how many more labelled hold-out samples
  // are expected to settle the verdict (see DecideGate).
  std::optional<std::uint64_t> additional_sample_count;
  // Every confidence statement the verdict used and the delta it spent, in
  // the order computed; the deltas sum to at most policy.failure_probability.
  std::vector<DeltaSpend> delta_ledger;
  // The sum of delta_ledger's failure probabilities: <= policy's.
  double spent_failure_probability = 0.0;
  // The bound families the risk bounds used, for the audit record: those of
  // the risk upper bound in policy order, then kHoldoutExactBinomial for the
  // risk lower bound when there are hold-out counts and for the slices' bounds
  // (kHoldoutAnytime in sequential mode), each at most once.
  std::vector<Family> families_used;
  // Cautions that apply to every verdict (GateCautions), plus
  // SliceCautions() with slices.
  std::vector<std::string> cautions;
  // With slice limits: every slice, worst first (largest risk_upper_bound -
  // max_risk first, ties by name).
  std::vector<SliceCheck> slices;
};

// GateCautions
// The cautions every gate answer carries: Cautions() (certify.h) and the
// gate's own (policy fixed in advance, hold-out set used once).
const std::vector<std::string>& GateCautions();

// ValidateGate
// Returns OK, or INVALID_ARGUMENT naming every bad field at once (the checks
// of DecideGate, without computing any bound).
absl::Status ValidateGate(const GatePolicy& policy, const GateCandidate& candidate,
                          const std::optional<ChampionComparison>& champion);

// CheckGatePolicy
// Appends every bad field of `policy` to `violations`, with paths
// "<prefix>.max_risk", "<prefix>.failure_probability",
// "<prefix>.allowed_families[i]", "<prefix>.max_regression",
// "<prefix>.plan_pass_probability" (the policy checks of ValidateGate, which
// uses the prefix "policy"). Returns false when allowed_families cannot be
// used (an entry unknown, repeated or bounding a loss), true otherwise.
bool CheckGatePolicy(const GatePolicy& policy, const std::string& prefix,
                     std::vector<FieldViolation>* violations);

// VerdictName
// Returns "PROMOTE", "HOLD" or "REJECT" (for reasons and logs).
const char* VerdictName(Verdict verdict);

// DecideGate
// Returns the verdict for `candidate` under `policy`, compared with
// `champion` when one is given. With U the risk upper bound, L the risk lower
// bound, epsilon = policy.max_risk, DU / DL the difference limits and
// t = policy.max_regression (0 if unset):
//  * REJECT when L > epsilon, or DL > t (worse than the champion beyond the
//    tolerance, with confidence), or some slice's lower bound exceeds its
//    limit: more data is not expected to help. REJECT
//    also wins over PROMOTE when training-set and hold-out bounds contradict
//    each other (U <= epsilon < L).
//  * PROMOTE when U <= epsilon and (champion given) DU <= t and (slice
//    limits given) every slice's upper bound is at or below its limit.
//  * HOLD otherwise, and whenever the hold-out set has fewer than
//    policy.min_holdout_sample_count samples (the policy's "more data needed";
//    the bounds are still computed and reported). A HOLD carries
//    additional_sample_count when a plan exists:
//      - risk unsettled, observed hold-out rate p < epsilon: PlanHoldout
//        (plan.h) with target epsilon, expected rate p, the delta share of
//        the exact binomial upper bound, policy.plan_pass_probability and
//        the samples already held (a power calculation);
//      - risk unsettled, p >= epsilon: the mirror-image plan for a REJECT: the
//        smallest total n at which P(Bin(n, p) >= k_min(n)) reaches the pass
//        probability, k_min(n) being the fewest errors whose Clopper-Pearson
//        lower limit exceeds epsilon (found by exponential search and
//        bisection, so a small n, not always the very smallest; given up,
//        with no plan, past a work budget of 150 ms of CPU);
//      - champion comparison unsettled (paired only): a total n at which
//        the difference limits settle the comparison with probability >=
//        policy.plan_pass_probability when the disagreement rates stay as
//        observed, by exact enumeration of the disagreement counts (B
//        binomial, C given B binomial) with Clopper-Pearson limits at the
//        comparison's share (where the counts have standard deviations
//        above 32, in blocks and on a grid of 1/32 of one, counted at the
//        block's least favourable count, so the probability stays a lower
//        bound); the search runs over sizes held + j * step, step = 1/256 of
//        a normal-approximation guess, from that guess, and returns the
//        smallest such size it finds that reaches the probability (the
//        probability moves in steps, so not always the very smallest n);
//        given up past a work budget of 80 ms of CPU (plans of about a
//        million samples and more);
//      - below the minimum: at least the samples missing to reach it;
//      - undecided slices: for each, worst first, the same risk plans on the
//        slice's own counts, limit and bound shares, in samples from that
//        slice (SliceCheck.additional_sample_count), within a per-call
//        planning budget of 250 ms of CPU for all slices together (slices
//        past it get no plan, and say so); their sum counts as one plan.
//    The largest of these is reported.
// Errors: INVALID_ARGUMENT naming every bad field by its API path
// (policy.max_risk, policy.failure_probability, policy.allowed_families[i],
// policy.max_regression, policy.plan_pass_probability, candidate.id,
// candidate.evidence.*, champion.champion_id, champion.paired.*,
// champion.champion_holdout.*, champion), including evidence no allowed
// family can use and paired counts that disagree with the candidate's
// hold-out counts. Never returns NaN or Inf in a decision.
// Stops early when `stop` does and returns its status (CANCELLED or
// DEADLINE_EXCEEDED), never a partial decision.
// Thread-safe; no shared state.
absl::StatusOr<GateDecision> DecideGate(const GatePolicy& policy,
                                        const GateCandidate& candidate,
                                        const std::optional<ChampionComparison>& champion,
                                        const StopToken& stop = StopToken::Never());

}  // namespace riskbound::core

#endif  // RISKBOUND_SERVICE_CORE_GATE_H_
