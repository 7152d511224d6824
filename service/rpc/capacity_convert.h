// Conversion between the capacity-catalogue messages (capacity.proto) and
// core::ModelDescription / core::CapacityEstimate, and the turning of a model
// description into a ClassCapacity for the training-set bound families.
//
// Field paths: the core names model fields "model.<field>"; here they are
// re-rooted under the path the model sits at in the request ("model" for
// EstimateCapacity, "evidence.training.capacity.model" for Certify), so an
// error always names the field as the caller wrote it.
#ifndef RISKBOUND_SERVICE_RPC_CAPACITY_CONVERT_H_
#define RISKBOUND_SERVICE_RPC_CAPACITY_CONVERT_H_

#include <optional>
#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "riskbound/v1/capacity.pb.h"
#include "service/core/capacity.h"
#include "service/core/evidence.h"
#include "service/core/field_violation.h"

namespace riskbound::rpc {

// ModelDescriptionFromProto
// Returns the core description, or nullopt after appending a violation named
// "<model_path>.kind" when the kind is unspecified or unknown, or one named
// "<model_path>.layer_widths" when it has more than core::kMaxLayerWidths
// entries (checked before any entry is copied). Every other check is the
// core's (core::EstimateCapacity). Thread-safe.
std::optional<core::ModelDescription> ModelDescriptionFromProto(
    const v1::ModelDescription& in, const std::string& model_path,
    std::vector<core::FieldViolation>* violations);

// ModelDescriptionToProto
// The inverse of ModelDescriptionFromProto (for tests and clients).
void ModelDescriptionToProto(const core::ModelDescription& in, v1::ModelDescription* out);

// EstimateModel
// Converts `in` and runs core::EstimateCapacity. Returns the estimate, or
// nullopt after appending every violation, each re-rooted from "model" to
// `model_path` (e.g. "evidence.training.capacity.model.layer_widths[1]").
// When the core listed only some (core::InvalidFields caps its list), the
// first kMaxListedViolations - 1 are appended and one more, named
// `model_path`, says how many were not listed. Thread-safe.
std::optional<core::CapacityEstimate> EstimateModel(const v1::ModelDescription& in,
                                                    const std::string& model_path,
                                                    std::vector<core::FieldViolation>* violations);

// ModelCapacityFromProto
// Fills `out` from a model description through the catalogue: a finite VC
// dimension (exact or an upper bound, an integer already) becomes
// vc_dimension; a finite class becomes log_hypothesis_count; out->notes gets
// one note saying which capacity was used (value, exact or upper bound,
// formula, source). Appends a violation named `model_path` when the family
// has infinite VC dimension (with what to use instead) or when its bound does
// not fit in 64 bits, and the model's own violations re-rooted under
// `model_path`. Thread-safe.
void ModelCapacityFromProto(const v1::ModelDescription& in, const std::string& model_path,
                            core::ClassCapacity* out,
                            std::vector<core::FieldViolation>* violations);

// DropRedundantCapacityViolations
// Removes a violation named "<path>.capacity" (the core's "a training-set
// bound needs a capacity") when a violation under "<path>.capacity.model"
// already says why the model gave none. Call after core::ValidateEvidence.
// Linear in the number and length of the paths.
void DropRedundantCapacityViolations(std::vector<core::FieldViolation>* violations);

// CapacityEstimateToProto
// Fills the proto estimate; vc_dimension_uint64 only when the value fits.
void CapacityEstimateToProto(const core::CapacityEstimate& in, v1::CapacityEstimate* out);

// EstimateCapacityRequestFromProto
// Returns the core description, or INVALID_ARGUMENT naming "model" (missing),
// "model.kind" or "model.layer_widths" (over its cap). Thread-safe.
absl::StatusOr<core::ModelDescription> EstimateCapacityRequestFromProto(
    const v1::EstimateCapacityRequest& in);

// EstimateCapacityResponseToProto
// The response for a core estimate, with the engine version.
v1::EstimateCapacityResponse EstimateCapacityResponseToProto(
    const core::CapacityEstimate& estimate);

}  // namespace riskbound::rpc

#endif  // RISKBOUND_SERVICE_RPC_CAPACITY_CONVERT_H_
