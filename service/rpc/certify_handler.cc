// RiskBound.Certify: convert -> core::Certify -> convert.
#include "service/core/certify.h"
#include "service/rpc/convert.h"
#include "service/rpc/handlers.h"

namespace riskbound::rpc {

absl::StatusOr<v1::CertifyResponse> HandleCertify(const v1::CertifyRequest& request,
                                                  const CallInfo& call) {
  const Converted<core::CertifyRequest> in = CertifyRequestFromProto(request);
  if (!in.refusals.empty()) {
    return WithRefusals(in.refusals, core::ValidateCertifyRequest(in.request));
  }
  absl::StatusOr<core::CertifyResult> result = core::Certify(in.request, call.stop);
  if (!result.ok()) return result.status();
  return CertifyResponseToProto(*result);
}

}  // namespace riskbound::rpc
