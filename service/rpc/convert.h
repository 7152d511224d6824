// Conversion between the riskbound.v1 messages and the core structs, with the
// request checks that only the wire shape can fail (a zero hypothesis count,
// a missing capacity oneof). Semantic checks live in the core
// (core::ValidateEvidence, core::Certify) and run here too, so one call
// returns every violation of a request at once.
#ifndef RISKBOUND_SERVICE_RPC_CONVERT_H_
#define RISKBOUND_SERVICE_RPC_CONVERT_H_

#include "absl/status/statusor.h"
#include "riskbound/v1/certify.pb.h"
#include "riskbound/v1/common.pb.h"
#include "service/core/certify.h"

namespace riskbound::rpc {

// CertifyRequestFromProto
// Returns the core request, or INVALID_ARGUMENT listing every bad field by its
// path (see core/field_violation.h). Thread-safe.
absl::StatusOr<core::CertifyRequest> CertifyRequestFromProto(const v1::CertifyRequest& in);

// CertificateToProto
// Fills the proto certificate, with the family's name, source and assumptions.
void CertificateToProto(const core::Certificate& in, v1::Certificate* out);

// CertifyResponseToProto
// Returns the response for a core result: certificates, the tightest, the
// delta accounting, the cautions and the engine version.
v1::CertifyResponse CertifyResponseToProto(const core::CertifyResult& result,
                                           double requested_delta);

}  // namespace riskbound::rpc

#endif  // RISKBOUND_SERVICE_RPC_CONVERT_H_
