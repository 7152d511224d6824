// RiskBound.SelectStructure: convert -> core::SelectStructure -> convert.
#include "service/core/select.h"
#include "service/rpc/handlers.h"
#include "service/rpc/select_convert.h"

namespace riskbound::rpc {

absl::StatusOr<v1::SelectStructureResponse> HandleSelectStructure(
    const v1::SelectStructureRequest& request, const CallInfo& call) {
  const Converted<core::SelectRequest> in = SelectRequestFromProto(request);
  if (!in.refusals.empty()) {
    return WithRefusals(in.refusals, core::ValidateSelectRequest(in.request));
  }
  absl::StatusOr<core::SelectResult> result = core::SelectStructure(in.request, call.stop);
  if (!result.ok()) return result.status();
  return SelectResponseToProto(*result);
}

}  // namespace riskbound::rpc
