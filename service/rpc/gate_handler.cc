// RiskBound.Gate: convert -> core::DecideGate -> convert (with the audit
// record; its timestamp is the decision time from absl::Now, its request id
// the call's).
#include "absl/time/clock.h"
#include "service/core/gate.h"
#include "service/rpc/gate_convert.h"
#include "service/rpc/handlers.h"

namespace riskbound::rpc {

absl::StatusOr<v1::GateResponse> HandleGate(const v1::GateRequest& request,
                                            const CallInfo& call) {
  const Converted<GateInputs> in = GateInputsFromProto(request);
  const GateInputs& g = in.request;
  if (!in.refusals.empty()) {
    return WithRefusals(in.refusals, core::ValidateGate(g.policy, g.candidate, g.champion));
  }
  absl::StatusOr<core::GateDecision> decision =
      core::DecideGate(g.policy, g.candidate, g.champion, call.stop);
  if (!decision.ok()) return decision.status();
  return GateResponseToProto(*decision, request, absl::Now(), call.request_id);
}

}  // namespace riskbound::rpc
