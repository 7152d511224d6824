// The parts of the promotion gate (gate.h), one concern per file:
//   gate.cc            validation, the failure-probability split, the bounds
//                      (Measure) and DecideGate, which puts the parts together
//   gate_decision.cc   the decision table: findings -> verdict and the rule
//                      that decided
//   gate_reasons.cc    the reason sentences
//   gate_hold_plan.cc  the HOLD planner: how many more hold-out samples are
//                      expected to settle a HOLD
// Internal to the gate: only these files include it.
#ifndef RISKBOUND_SERVICE_CORE_GATE_INTERNAL_H_
#define RISKBOUND_SERVICE_CORE_GATE_INTERNAL_H_

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "service/core/evidence.h"
#include "service/core/families.h"
#include "service/core/gate.h"
#include "service/core/stop.h"

namespace riskbound::core::gate_internal {

// A number for a reason sentence: six significant digits.
std::string Num(double v);

// How policy.failure_probability is split; depends on the policy and the
// kinds of evidence present, never on their values (see gate.h).
struct Split {
  // The policy families that apply, in policy order.
  std::vector<const FamilySpec*> families;
  // Policy families that do not apply to this evidence.
  std::vector<const FamilySpec*> skipped;
  // Failure probability of each family's upper bound (risk-upper share / K).
  double per_family = 0.0;
  // 0 when there is no hold-out evidence (no lower bound).
  double risk_lower = 0.0;
  double difference_upper = 0.0;
  double difference_lower = 0.0;
  // The slices' part (0 without slices), shared between them by
  // policy.slice_sharing.
  double slices_total = 0.0;
};

// MakeSplit
// REQUIRES: the policy families are known and distinct (validated).
Split MakeSplit(const GatePolicy& policy, const Evidence& evidence, bool with_champion);

// What the bounds measured: everything the decision table, the reasons and
// the planner read.
struct Measured {
  Split split;
  // epsilon = policy.max_risk.
  double max_risk = 0.0;
  // The tightest risk upper bound (its lower bound cleared), the family that
  // gave it and how many families were computed.
  Certificate risk_certificate;
  std::string upper_family_name;
  std::size_t upper_family_count = 0;
  // The Clopper-Pearson lower limit on the hold-out counts, when there are any.
  std::optional<SampleCounts> holdout;
  std::optional<double> risk_lower_bound;
  // The champion comparison, when there is a champion.
  std::optional<std::string> champion_id;
  bool paired = false;
  // policy.max_regression, 0 when unset (tolerance_given false).
  double tolerance = 0.0;
  bool tolerance_given = false;
  std::optional<double> difference_upper;
  std::optional<double> difference_lower;
  // How the difference limits were computed, in words.
  std::string comparison_how;
  std::optional<double> mcnemar_p_value;
  // Hold-out samples held (0 without hold-out counts) and the policy's minimum.
  std::uint64_t held = 0;
  std::uint64_t min_holdout_sample_count = 0;
  // policy.sequential: every hold-out bound is anytime-valid.
  bool sequential = false;
  // With slice limits: every slice, worst first (SliceCheck without its plan;
  // the reason holds the bounds sentence), and the rule that shared delta.
  std::vector<SliceCheck> slices;
  SliceShareRule slice_rule = SliceShareRule::kBonferroni;
  bool slice_weighted = false;
};

// The yes/no facts the decision table reads.
struct Findings {
  // Fewer hold-out samples than the policy's minimum.
  bool below_min = false;
  // Risk upper bound U <= epsilon.
  bool risk_promote = false;
  // Risk lower bound L > epsilon.
  bool risk_reject = false;
  bool has_champion = false;
  // Difference upper bound DU <= tolerance (true without a champion).
  bool cmp_promote = true;
  // Difference lower bound DL > tolerance.
  bool cmp_reject = false;
  // Every slice clears its limit (true without slices); some slice exceeds.
  bool slices_promote = true;
  bool slices_reject = false;
};

// FindingsOf
// The facts of `m`.
Findings FindingsOf(const Measured& m);

// The row of the decision table that decided.
enum class Rule {
  kBelowMinimum,  // HOLD: fewer hold-out samples than the policy's minimum
  kReject,        // REJECT: L > epsilon or DL > tolerance
  kPromote,       // PROMOTE: U <= epsilon and (with a champion) DU <= tolerance
  kUnsettled,     // HOLD: neither shown
};

struct Decision {
  Verdict verdict = Verdict::kHold;
  Rule rule = Rule::kUnsettled;
};

// DecideVerdict
// The decision table of gate.h (DecideGate), first matching row wins:
//   below the minimum                    -> HOLD    (kBelowMinimum)
//   risk_reject, cmp_reject or
//   slices_reject                        -> REJECT  (kReject)
//   risk_promote, cmp_promote and
//   slices_promote                       -> PROMOTE (kPromote)
//   otherwise                            -> HOLD    (kUnsettled)
Decision DecideVerdict(const Findings& f);

// SummaryReason
// The first reason: the verdict and the rule that decided, with its numbers.
std::string SummaryReason(const Decision& decision, const Findings& f, const Measured& m);

// BoundReasons
// One sentence per bound and per remark on them, in the order computed:
// families not used, the union bound over families, the risk upper bound
// (and whether it is vacuous), the risk lower bound (or why there is none), a
// contradiction between them, then the champion comparison.
std::vector<std::string> BoundReasons(const Findings& f, const Measured& m);

// SliceSentence
// One slice's bounds against its limit, in words (SliceCheck.reason before
// any plan).
std::string SliceSentence(const SliceCheck& slice, bool sequential);

// The HOLD planner's answer.
struct HoldPlan {
  // How many more labelled hold-out samples are expected to settle the
  // verdict; unset when some open question has no plan.
  std::optional<std::uint64_t> additional_sample_count;
  // One sentence per plan (or per reason there is none).
  std::vector<std::string> reasons;
};

// PlanHold
// For a HOLD: the plans of gate.h (DecideGate), the largest of them. `pass`
// is the plan pass probability. Undecided slices of *slices get their plan
// (additional_sample_count, and its sentence appended to reason). Returns
// stop.Status() when `stop` stops.
absl::StatusOr<HoldPlan> PlanHold(const GatePolicy& policy, const Evidence& evidence,
                                  const std::optional<ChampionComparison>& champion,
                                  const Findings& f, const Measured& m, double pass,
                                  const StopToken& stop, std::vector<SliceCheck>* slices);

}  // namespace riskbound::core::gate_internal

#endif  // RISKBOUND_SERVICE_CORE_GATE_INTERNAL_H_
