// Conversion between riskbound.v1 SelectStructure messages (select.proto) and
// core::SelectRequest / core::SelectResult.
//
// Field paths: the core names candidates "candidates[i]" with their counts
// under ".training"; on the wire the list is "structure" and the counts sit on
// the candidate itself. Every violation the core reports is re-rooted to the
// wire path ("candidates[1].training.error_count" -> "structure[1].error_count",
// "spread" -> "delta_spread"), so an error always names the field as the
// caller wrote it.
#ifndef RISKBOUND_SERVICE_RPC_SELECT_CONVERT_H_
#define RISKBOUND_SERVICE_RPC_SELECT_CONVERT_H_

#include <functional>
#include <string>
#include <vector>

#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "riskbound/v1/select.pb.h"
#include "service/core/field_violation.h"
#include "service/core/select.h"

namespace riskbound::rpc {

// The fragility tolerance used when the request leaves it unset.
inline constexpr double kDefaultFragilityTolerance = 0.01;

// MergeViolations
// Returns `core_status` unchanged unless it carries field violations
// (core::InvalidFields); then INVALID_ARGUMENT listing `shape` followed by the
// core's violations with each path passed through `to_wire`, leaving out a
// core violation whose wire path is `shape`'s path or a parent of it (the
// shape check already said what is wrong there). Violations the core's status
// counted but did not list (core::InvalidFields caps the list) stay counted.
// With an OK `core_status`, returns InvalidFields(shape) (OK when `shape` is
// empty). Linear in the number and length of the paths. Thread-safe.
absl::Status MergeViolations(const std::vector<core::FieldViolation>& shape,
                             const absl::Status& core_status,
                             const std::function<std::string(const std::string&)>& to_wire);

// SelectPathToWire
// The wire path of a field path the core's SelectStructure reports.
std::string SelectPathToWire(const std::string& core_path);

// SelectRequestFromProto
// Returns the core request, or INVALID_ARGUMENT listing every bad field by its
// wire path: the shape checks (capacity oneof, family and delta_spread
// values) together with the core's own checks. First of all the sizes
// (core/limits.h): more than kMaxStructureCandidates candidates or
// kMaxStructureWeights weights is refused with one violation ("structure" or
// "weights") before any candidate is looked at; an id longer than
// kMaxIdBytes is named "structure[i].id". Thread-safe.
absl::StatusOr<core::SelectRequest> SelectRequestFromProto(
    const v1::SelectStructureRequest& in);

// SelectResponseToProto
// Returns the response for a core result: one row per candidate (with the
// notes of any capacity taken from a model description), the choice, the
// fragility verdict, the delta accounting, the cautions and the engine
// version. REQUIRES: `result` came from core::SelectStructure(request).
v1::SelectStructureResponse SelectResponseToProto(const core::SelectRequest& request,
                                                  const core::SelectResult& result);

}  // namespace riskbound::rpc

#endif  // RISKBOUND_SERVICE_RPC_SELECT_CONVERT_H_
