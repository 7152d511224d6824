// RiskBound.SelectStructure: convert -> core::SelectStructure -> convert.
#include "absl/time/clock.h"
#include "service/core/select.h"
#include "service/rpc/handler_util.h"
#include "service/rpc/riskbound_service.h"
#include "service/rpc/select_convert.h"

namespace riskbound::rpc {

grpc::Status RiskBoundService::SelectStructure(grpc::ServerContext* /*context*/,
                                               const v1::SelectStructureRequest* request,
                                               v1::SelectStructureResponse* response) {
  const absl::Time start = absl::Now();
  absl::StatusOr<core::SelectRequest> core_request = SelectRequestFromProto(*request);
  if (!core_request.ok()) return FinishCall("SelectStructure", start, core_request.status());
  absl::StatusOr<core::SelectResult> result = core::SelectStructure(*core_request);
  if (!result.ok()) {
    return FinishCall("SelectStructure", start,
                      MergeViolations({}, result.status(), SelectPathToWire));
  }
  *response = SelectResponseToProto(*core_request, *result);
  return FinishCall("SelectStructure", start, absl::OkStatus());
}

}  // namespace riskbound::rpc
