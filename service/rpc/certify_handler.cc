// RiskBound.Certify: convert -> core::Certify -> convert.
#include "absl/time/clock.h"
#include "service/core/certify.h"
#include "service/rpc/convert.h"
#include "service/rpc/handler_util.h"
#include "service/rpc/riskbound_service.h"

namespace riskbound::rpc {

grpc::Status RiskBoundService::Certify(grpc::ServerContext* /*context*/,
                                       const v1::CertifyRequest* request,
                                       v1::CertifyResponse* response) {
  const absl::Time start = absl::Now();
  absl::StatusOr<core::CertifyRequest> core_request = CertifyRequestFromProto(*request);
  if (!core_request.ok()) return FinishCall("Certify", start, core_request.status());
  absl::StatusOr<core::CertifyResult> result = core::Certify(*core_request);
  if (!result.ok()) return FinishCall("Certify", start, result.status());
  *response = CertifyResponseToProto(*result, core_request->delta);
  return FinishCall("Certify", start, absl::OkStatus());
}

}  // namespace riskbound::rpc
