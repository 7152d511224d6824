// RiskBound.SelectStructure: convert -> core::SelectStructure -> convert.
#include "service/core/select.h"
#include "service/rpc/handlers.h"
#include "service/rpc/select_convert.h"

namespace riskbound::rpc {

absl::StatusOr<v1::SelectStructureResponse> HandleSelectStructure(
    const v1::SelectStructureRequest& request, const core::StopToken& stop) {
  absl::StatusOr<core::SelectRequest> core_request = SelectRequestFromProto(request);
  if (!core_request.ok()) return core_request.status();
  absl::StatusOr<core::SelectResult> result = core::SelectStructure(*core_request, stop);
  if (!result.ok()) return MergeViolations({}, result.status(), SelectPathToWire);
  return SelectResponseToProto(*core_request, *result);
}

}  // namespace riskbound::rpc
