// RiskBound.Gate: convert -> core::DecideGate -> convert (with the audit
// record; its timestamp is the decision time from absl::Now).
#include "absl/time/clock.h"
#include "service/core/gate.h"
#include "service/rpc/gate_convert.h"
#include "service/rpc/handler_util.h"
#include "service/rpc/riskbound_service.h"

namespace riskbound::rpc {

grpc::Status RiskBoundService::Gate(grpc::ServerContext* /*context*/,
                                    const v1::GateRequest* request,
                                    v1::GateResponse* response) {
  const absl::Time start = absl::Now();
  absl::StatusOr<GateInputs> inputs = GateInputsFromProto(*request);
  if (!inputs.ok()) return FinishCall("Gate", start, inputs.status());
  absl::StatusOr<core::GateDecision> decision =
      core::DecideGate(inputs->policy, inputs->candidate, inputs->champion);
  if (!decision.ok()) return FinishCall("Gate", start, decision.status());
  *response = GateResponseToProto(*decision, *request, absl::Now());
  return FinishCall("Gate", start, absl::OkStatus());
}

}  // namespace riskbound::rpc
