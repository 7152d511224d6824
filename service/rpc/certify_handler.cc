// RiskBound.Certify: convert -> core::Certify -> convert.
#include "service/core/certify.h"
#include "service/rpc/convert.h"
#include "service/rpc/handlers.h"

namespace riskbound::rpc {

absl::StatusOr<v1::CertifyResponse> HandleCertify(const v1::CertifyRequest& request,
                                                  const core::StopToken& stop) {
  absl::StatusOr<core::CertifyRequest> core_request = CertifyRequestFromProto(request);
  if (!core_request.ok()) return core_request.status();
  absl::StatusOr<core::CertifyResult> result = core::Certify(*core_request, stop);
  if (!result.ok()) return result.status();
  return CertifyResponseToProto(*result, core_request->failure_probability);
}

}  // namespace riskbound::rpc
