// RiskBound.EstimateCapacity: convert -> core::EstimateCapacity -> convert.
// The core names bad fields "model.<field>", their path in the request.
#include "service/core/capacity.h"
#include "service/rpc/capacity_convert.h"
#include "service/rpc/handlers.h"

namespace riskbound::rpc {

absl::StatusOr<v1::EstimateCapacityResponse> HandleEstimateCapacity(
    const v1::EstimateCapacityRequest& request, const CallInfo& call) {
  const Converted<core::ModelDescription> in = EstimateCapacityRequestFromProto(request);
  // An oversized model is refused as a whole: nothing else of it is judged.
  if (!in.refusals.empty()) return WithRefusals(in.refusals, absl::OkStatus());
  absl::StatusOr<core::CapacityEstimate> estimate =
      core::EstimateCapacity(in.request, call.stop, "model");
  if (!estimate.ok()) return estimate.status();
  return EstimateCapacityResponseToProto(*estimate);
}

}  // namespace riskbound::rpc
