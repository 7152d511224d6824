#include "service/rpc/handler_util.h"

#include <string>

#include "absl/time/clock.h"
#include "service/rpc/status.h"
#include "spdlog/spdlog.h"

namespace riskbound::rpc {

grpc::Status FinishCall(const char* method, absl::Time start, const absl::Status& status) {
  spdlog::debug("rpc={} code={} micros={}{}{}", method, absl::StatusCodeToString(status.code()),
                absl::ToInt64Microseconds(absl::Now() - start), status.ok() ? "" : " error=",
                std::string(status.message()));
  return ToGrpcStatus(status);
}

}  // namespace riskbound::rpc
