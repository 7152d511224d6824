// RiskBound.EstimateCapacity: convert -> core::EstimateCapacity -> convert.
// The core names bad fields "model.<field>", which is their path in the
// request, so its errors pass through unchanged.
#include "service/core/capacity.h"
#include "service/rpc/capacity_convert.h"
#include "service/rpc/handlers.h"

namespace riskbound::rpc {

absl::StatusOr<v1::EstimateCapacityResponse> HandleEstimateCapacity(
    const v1::EstimateCapacityRequest& request, const core::StopToken& stop) {
  absl::StatusOr<core::ModelDescription> model = EstimateCapacityRequestFromProto(request);
  if (!model.ok()) return model.status();
  absl::StatusOr<core::CapacityEstimate> estimate = core::EstimateCapacity(*model, stop);
  if (!estimate.ok()) return estimate.status();
  return EstimateCapacityResponseToProto(*estimate);
}

}  // namespace riskbound::rpc
