#include "service/rpc/riskbound_service.h"

#include <string>

#include "absl/time/clock.h"
#include "absl/time/time.h"
#include "service/core/certify.h"
#include "service/rpc/convert.h"
#include "service/rpc/status.h"
#include "spdlog/spdlog.h"

namespace riskbound::rpc {
namespace {

// Logs one line per request (debug) and returns the gRPC status.
grpc::Status Finish(const char* method, absl::Time start, const absl::Status& status) {
  spdlog::debug("rpc={} code={} micros={}{}{}", method, absl::StatusCodeToString(status.code()),
                absl::ToInt64Microseconds(absl::Now() - start), status.ok() ? "" : " error=",
                std::string(status.message()));
  return ToGrpcStatus(status);
}

}  // namespace

grpc::Status RiskBoundService::Certify(grpc::ServerContext* /*context*/,
                                       const v1::CertifyRequest* request,
                                       v1::CertifyResponse* response) {
  const absl::Time start = absl::Now();
  absl::StatusOr<core::CertifyRequest> core_request = CertifyRequestFromProto(*request);
  if (!core_request.ok()) return Finish("Certify", start, core_request.status());
  absl::StatusOr<core::CertifyResult> result = core::Certify(*core_request);
  if (!result.ok()) return Finish("Certify", start, result.status());
  *response = CertifyResponseToProto(*result, core_request->delta);
  return Finish("Certify", start, absl::OkStatus());
}

}  // namespace riskbound::rpc
