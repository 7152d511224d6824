// Shared by the RPC handlers: finishing a call (one debug log line with the
// method, status code and latency; absl -> grpc status).
#ifndef RISKBOUND_SERVICE_RPC_HANDLER_UTIL_H_
#define RISKBOUND_SERVICE_RPC_HANDLER_UTIL_H_

#include "absl/status/status.h"
#include "absl/time/time.h"
#include "grpcpp/support/status.h"

namespace riskbound::rpc {

// FinishCall
// Logs "rpc=<method> code=<code> micros=<latency>[ error=<message>]" at debug
// level and returns the gRPC status for `status`. Thread-safe.
grpc::Status FinishCall(const char* method, absl::Time start, const absl::Status& status);

}  // namespace riskbound::rpc

#endif  // RISKBOUND_SERVICE_RPC_HANDLER_UTIL_H_
