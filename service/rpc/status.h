// Mapping absl::Status to grpc::Status.
//
// Abseil's status codes are numerically gRPC's, so code and message are copied
// as they are. INVALID_ARGUMENT answers made by core::InvalidFields also carry
// the field violations as structured details (riskbound.v1.ErrorStatus holding
// riskbound.v1.FieldViolations, wire-compatible with google.rpc.Status and
// google.rpc.BadRequest) in the "grpc-status-details-bin" trailer.
#ifndef RISKBOUND_SERVICE_RPC_STATUS_H_
#define RISKBOUND_SERVICE_RPC_STATUS_H_

#include "absl/status/status.h"
#include "grpcpp/support/status.h"

namespace riskbound::rpc {

// ToGrpcStatus
// Returns the grpc::Status with the same code and message, plus details for
// field violations. Thread-safe.
grpc::Status ToGrpcStatus(const absl::Status& status);

}  // namespace riskbound::rpc

#endif  // RISKBOUND_SERVICE_RPC_STATUS_H_
