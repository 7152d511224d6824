// Mapping absl::Status to grpc::Status.
//
// Abseil's status codes are numerically gRPC's, so the code is copied as it
// is. INVALID_ARGUMENT answers made by core::InvalidFields also carry the
// field violations as the standard error details: the
// "grpc-status-details-bin" trailer holds a google.rpc.Status (same code and
// message) whose details are
//   - a google.rpc.BadRequest (type URL
//     "type.googleapis.com/google.rpc.BadRequest"): one field violation per
//     bad field, its path and what is wrong; and
//   - a google.rpc.ErrorInfo ("type.googleapis.com/google.rpc.ErrorInfo"):
//     reason "INVALID_FIELDS", domain "riskbound.v1", metadata
//     "violation_count" (every violation found, listed or not) and
//     "listed_violation_count" (those in the BadRequest, summary excluded).
// The messages come from proto/google/rpc/, wire-compatible copies of the
// published googleapis definitions.
//
// Trailer budget. gRPC clients refuse trailers over 8 KiB by default
// (RESOURCE_EXHAUSTED instead of the real answer), so every answer keeps
// the percent-encoded grpc-message plus the base64 grpc-status-details-bin
// within kTrailerBudgetBytes (5 KiB), leaving room below 6 KiB for header
// names and the other trailers:
//   - grpc-message: the message sanitized and cut to core::kMaxMessageBytes
//     (512); percent-encoding at most triples it: <= 1536 bytes.
//   - details: the listed violations (each already cut by core::InvalidFields
//     to 128 + 512 bytes) are added in order while the base64 of the
//     serialized google.rpc.Status fits what the message left (>= 3584
//     bytes); the ones that do not fit are counted in the last violation,
//     field "request": "and N more invalid fields were not listed".
#ifndef RISKBOUND_SERVICE_RPC_STATUS_H_
#define RISKBOUND_SERVICE_RPC_STATUS_H_

#include <cstddef>

#include "absl/status/status.h"
#include "absl/strings/string_view.h"
#include "grpcpp/support/status.h"

namespace riskbound::rpc {

// ErrorInfo.reason and ErrorInfo.domain of an INVALID_ARGUMENT answer that
// names its bad fields.
inline constexpr char kInvalidFieldsReason[] = "INVALID_FIELDS";
inline constexpr char kErrorDomain[] = "riskbound.v1";

// Bytes the percent-encoded grpc-message and the base64
// grpc-status-details-bin of one answer may take together.
inline constexpr std::size_t kTrailerBudgetBytes = 5 * 1024;

// ToGrpcStatus
// Returns the grpc::Status with the same code, the message sanitized and cut
// to core::kMaxMessageBytes, plus details for field violations within the
// trailer budget. Thread-safe.
grpc::Status ToGrpcStatus(const absl::Status& status);

// PercentEncodedSize
// Bytes `text` takes as a grpc-message on the wire: every byte outside
// printable ASCII, and '%', becomes "%XX" (gRPC over HTTP/2, "Responses").
std::size_t PercentEncodedSize(absl::string_view text);

}  // namespace riskbound::rpc

#endif  // RISKBOUND_SERVICE_RPC_STATUS_H_
