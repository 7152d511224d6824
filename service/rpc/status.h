// Mapping absl::Status to grpc::Status.
//
// Abseil's status codes are numerically gRPC's, so the code is copied as it
// is. INVALID_ARGUMENT answers made by core::InvalidFields also carry the
// field violations as structured details (riskbound.v1.ErrorStatus holding
// riskbound.v1.FieldViolations, wire-compatible with google.rpc.Status and
// google.rpc.BadRequest) in the "grpc-status-details-bin" trailer.
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
//     serialized ErrorStatus fits what the message left (>= 3584 bytes); the
//     ones that do not fit are counted in the last violation, field
//     "request": "and N more invalid fields were not listed".
#ifndef RISKBOUND_SERVICE_RPC_STATUS_H_
#define RISKBOUND_SERVICE_RPC_STATUS_H_

#include <cstddef>

#include "absl/status/status.h"
#include "absl/strings/string_view.h"
#include "grpcpp/support/status.h"

namespace riskbound::rpc {

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
