// Conversion between the capacity-catalogue messages (capacity.proto) and
// core::ModelDescription / core::CapacityEstimate: a mechanical copy both
// ways, the kind through enums.h. The core names a model's fields by their
// path in the request ("model.degree" in EstimateCapacity,
// "evidence.training.capacity.model.degree" inside Certify), so its errors
// pass through unchanged.
#ifndef RISKBOUND_SERVICE_RPC_CAPACITY_CONVERT_H_
#define RISKBOUND_SERVICE_RPC_CAPACITY_CONVERT_H_

#include <string>

#include "riskbound/v1/capacity.pb.h"
#include "service/core/capacity.h"
#include "service/rpc/refusals.h"

namespace riskbound::rpc {

// ModelDescriptionFromProto
// Copies every field that is set; the kind is nullopt when unset or unknown
// (the core names it). layer_widths over core::kMaxLayerWidths is refused at
// "<model_path>.layer_widths", before any entry is copied, and the whole
// model is left out of the core's findings (it cannot be judged without its
// widths). Thread-safe.
core::ModelDescription ModelDescriptionFromProto(const v1::ModelDescription& in,
                                                 const std::string& model_path, Refusals* refusals);

// ModelDescriptionToProto
// The inverse of ModelDescriptionFromProto (for tests and clients).
void ModelDescriptionToProto(const core::ModelDescription& in, v1::ModelDescription* out);

// CapacityEstimateToProto
// Copies the estimate; vc_dimension_uint64 only when the value fits.
void CapacityEstimateToProto(const core::CapacityEstimate& in, v1::CapacityEstimate* out);

// EstimateCapacityRequestFromProto
// The core description of `model` (an unset model is an empty description:
// the core names its missing kind). Thread-safe.
Converted<core::ModelDescription> EstimateCapacityRequestFromProto(
    const v1::EstimateCapacityRequest& in);

// EstimateCapacityResponseToProto
// The response for a core estimate, with the engine version.
v1::EstimateCapacityResponse EstimateCapacityResponseToProto(
    const core::CapacityEstimate& estimate);

}  // namespace riskbound::rpc

#endif  // RISKBOUND_SERVICE_RPC_CAPACITY_CONVERT_H_
