// Field violations: how the core reports bad input.
//
// Every check of a request collects FieldViolations, each naming the field by
// its API path ("evidence.holdout.error_count"). InvalidFields turns them into
// one INVALID_ARGUMENT status with a bounded message and a payload that
// carries them for the RPC layer to attach as structured error details.
//
// Bounds (a hostile request must not turn into megabytes of error text): at
// most kMaxListedViolations violations are listed, the rest are counted and
// summarized by one more violation ("and N more invalid fields were not
// listed"); every field path and description is sanitized (control
// characters and bytes that are not valid UTF-8 escaped, so "\n" in a
// caller's id shows as the two characters \n) and truncated with "..."; the
// message is at most kMaxMessageBytes.
#ifndef RISKBOUND_SERVICE_CORE_FIELD_VIOLATION_H_
#define RISKBOUND_SERVICE_CORE_FIELD_VIOLATION_H_

#include <cstddef>
#include <cstdint>
#include <string>
#include <vector>

#include "absl/status/status.h"
#include "absl/strings/string_view.h"

namespace riskbound::core {

struct FieldViolation {
  std::string field;
  std::string description;
  // For a violation that sums up others a check chose not to build ("and 4990
  // more invalid draws"): how many violations it stands for besides itself.
  // InvalidFields counts them as found but not listed.
  std::uint64_t also_counts = 0;
};

// At most this many violations are listed by InvalidFields; more are counted
// in one summary violation.
inline constexpr std::size_t kMaxListedViolations = 20;
// Longest field path kept (bytes, after sanitizing, "..." included).
inline constexpr std::size_t kMaxFieldPathBytes = 128;
// Longest description kept (bytes, after sanitizing, "..." included).
inline constexpr std::size_t kMaxDescriptionBytes = 512;
// Longest status message InvalidFields makes (bytes).
inline constexpr std::size_t kMaxMessageBytes = 512;

// The field path of the summary violation: the request as a whole.
inline constexpr char kSummaryField[] = "request";

// Type URL of the status payload that carries the violations. The encoding
// is length-prefixed, so no byte of a field or description can split or
// forge a violation: "rbfv1;" then netstrings ("<decimal length>:<bytes>,"):
// the count of violations found but not listed, then field and description
// of each listed violation.
inline constexpr char kFieldViolationsPayload[] = "riskbound/field-violations";

// InvalidFields
// Returns OK for an empty list (and unlisted_count 0), else INVALID_ARGUMENT.
// Lists the first kMaxListedViolations violations, sanitized and truncated;
// the others, plus `unlisted_count` (violations a caller found but did not
// keep, e.g. those a capped status it merges had already left out) and every
// violation's also_counts, are counted. The message is "field: description;
// field: description" for as many as fit in kMaxMessageBytes, then "; and N
// more invalid fields" when some were left out of it. Thread-safe.
absl::Status InvalidFields(const std::vector<FieldViolation>& violations,
                           std::uint64_t unlisted_count = 0);

// The violations a status made by InvalidFields carries.
struct ViolationReport {
  // The listed violations, sanitized, in order.
  std::vector<FieldViolation> listed;
  // How many more were found but not listed.
  std::uint64_t unlisted_count = 0;
};

// ViolationReportOf
// Returns the report carried by a status made by InvalidFields (empty for
// any other status, or a payload that does not decode exactly).
ViolationReport ViolationReportOf(const absl::Status& status);

// SummaryViolation
// The violation that stands for `unlisted_count` violations not listed:
// field kSummaryField, "and N more invalid fields were not listed".
FieldViolation SummaryViolation(std::uint64_t unlisted_count);

// FieldViolationsOf
// Returns the violations carried by a status made by InvalidFields: the
// listed ones and, when some were not listed, SummaryViolation last. Empty
// for any other status.
std::vector<FieldViolation> FieldViolationsOf(const absl::Status& status);

// SanitizeText
// Returns `text` safe to show and to send in a gRPC message: control
// characters escaped (\n, \r, \t, \xNN; C1 controls, line separators and
// bidirectional overrides as \u{XXXX}), bytes that are not valid UTF-8 as
// \xNN, valid UTF-8 kept; cut to at most `max_bytes` bytes (>= 3) with "..."
// at a character boundary when longer. Idempotent: sanitized text passes
// unchanged. Thread-safe.
std::string SanitizeText(absl::string_view text, std::size_t max_bytes);

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
// CheckListSize: at most `max_entries` entries (limits.h); else one
// violation "at most N entries, got M". Call before looking at the entries.
bool CheckListSize(const std::string& field, std::size_t size, std::size_t max_entries,
                   std::vector<FieldViolation>* out);
// CheckTextSize: at most `max_bytes` bytes (limits.h); else one violation
// "at most N bytes, got M".
bool CheckTextSize(const std::string& field, absl::string_view text, std::size_t max_bytes,
                   std::vector<FieldViolation>* out);

}  // namespace riskbound::core

#endif  // RISKBOUND_SERVICE_CORE_FIELD_VIOLATION_H_
