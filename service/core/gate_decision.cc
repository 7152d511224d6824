// The gate's decision table (gate_internal.h, DecideVerdict): pure, no
// numbers, only the facts the bounds established.
#include "service/core/gate_internal.h"

namespace riskbound::core::gate_internal {

Findings FindingsOf(const Measured& m) {
  Findings f;
  f.below_min = m.held < m.min_holdout_sample_count;
  f.risk_promote = m.risk_certificate.risk_upper_bound <= m.max_risk;
  f.risk_reject = m.risk_lower_bound.has_value() && *m.risk_lower_bound > m.max_risk;
  f.has_champion = m.champion_id.has_value();
  if (f.has_champion) {
    f.cmp_promote = *m.difference_upper <= m.tolerance;
    f.cmp_reject = *m.difference_lower > m.tolerance;
  }
  for (const SliceCheck& s : m.slices) {
    f.slices_promote = f.slices_promote && s.outcome == SliceOutcome::kClears;
    f.slices_reject = f.slices_reject || s.outcome == SliceOutcome::kExceeds;
  }
  return f;
}

Decision DecideVerdict(const Findings& f) {
  if (f.below_min) return {Verdict::kHold, Rule::kBelowMinimum};
  if (f.risk_reject || f.cmp_reject || f.slices_reject) return {Verdict::kReject, Rule::kReject};
  if (f.risk_promote && f.cmp_promote && f.slices_promote) {
    return {Verdict::kPromote, Rule::kPromote};
  }
  return {Verdict::kHold, Rule::kUnsettled};
}

}  // namespace riskbound::core::gate_internal
