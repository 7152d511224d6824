// Field violations: how the core reports bad input.
//
// Every check of a request collects FieldViolations, each naming the field by
// its API path ("evidence.holdout.error_count"). InvalidFields turns them into
// one INVALID_ARGUMENT status whose message lists them all and whose payload
// carries them for the RPC layer to attach as structured error details.
#ifndef RISKBOUND_SERVICE_CORE_FIELD_VIOLATION_H_
#define RISKBOUND_SERVICE_CORE_FIELD_VIOLATION_H_

#include <string>
#include <vector>

#include "absl/status/status.h"

namespace riskbound::core {

struct FieldViolation {
  std::string field;
  std::string description;
};

// Type URL of the status payload that carries the violations, one per line,
// as "field<TAB>description".
inline constexpr char kFieldViolationsPayload[] = "riskbound/field-violations";

// InvalidFields
// Returns OK for an empty list, else INVALID_ARGUMENT with the message
// "field: description; field: description" and the violations as payload.
absl::Status InvalidFields(const std::vector<FieldViolation>& violations);

// FieldViolationsOf
// Returns the violations carried by a status made by InvalidFields (empty for
// any other status).
std::vector<FieldViolation> FieldViolationsOf(const absl::Status& status);

// Checks that append a violation to `out` when the value is bad. Each returns
// true when the value is good.

// CheckProbabilityOpen: finite and strictly inside (0, 1).
bool CheckProbabilityOpen(const std::string& field, double value,
                          std::vector<FieldViolation>* out);
// CheckProbabilityClosed: finite and inside [0, 1].
bool CheckProbabilityClosed(const std::string& field, double value,
                            std::vector<FieldViolation>* out);
// CheckNonNegativeFinite: finite and >= 0.
bool CheckNonNegativeFinite(const std::string& field, double value,
                            std::vector<FieldViolation>* out);

}  // namespace riskbound::core

#endif  // RISKBOUND_SERVICE_CORE_FIELD_VIOLATION_H_
