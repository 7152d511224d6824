// RiskBound.EstimateCapacity: convert -> core::EstimateCapacity -> convert.
// The core names bad fields "model.<field>", which is their path in the
// request, so its errors pass through unchanged.
#include "absl/time/clock.h"
#include "service/core/capacity.h"
#include "service/rpc/capacity_convert.h"
#include "service/rpc/handler_util.h"
#include "service/rpc/riskbound_service.h"

namespace riskbound::rpc {

grpc::Status RiskBoundService::EstimateCapacity(grpc::ServerContext* /*context*/,
                                                const v1::EstimateCapacityRequest* request,
                                                v1::EstimateCapacityResponse* response) {
  const absl::Time start = absl::Now();
  absl::StatusOr<core::ModelDescription> model = EstimateCapacityRequestFromProto(*request);
  if (!model.ok()) return FinishCall("EstimateCapacity", start, model.status());
  absl::StatusOr<core::CapacityEstimate> estimate = core::EstimateCapacity(*model);
  if (!estimate.ok()) return FinishCall("EstimateCapacity", start, estimate.status());
  *response = EstimateCapacityResponseToProto(*estimate);
  return FinishCall("EstimateCapacity", start, absl::OkStatus());
}

}  // namespace riskbound::rpc
