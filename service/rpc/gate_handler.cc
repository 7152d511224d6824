// RiskBound.Gate: convert -> core::DecideGate -> convert (with the audit
// record; its timestamp is the decision time from absl::Now).
#include "absl/time/clock.h"
#include "service/core/gate.h"
#include "service/rpc/gate_convert.h"
#include "service/rpc/handlers.h"

namespace riskbound::rpc {

absl::StatusOr<v1::GateResponse> HandleGate(const v1::GateRequest& request,
                                            const core::StopToken& stop) {
  absl::StatusOr<GateInputs> inputs = GateInputsFromProto(request);
  if (!inputs.ok()) return inputs.status();
  absl::StatusOr<core::GateDecision> decision =
      core::DecideGate(inputs->policy, inputs->candidate, inputs->champion, stop);
  if (!decision.ok()) return decision.status();
  return GateResponseToProto(*decision, request, absl::Now());
}

}  // namespace riskbound::rpc
