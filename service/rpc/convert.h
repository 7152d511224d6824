// Conversion between the riskbound.v1 messages and the core structs, both
// ways: a total, mechanical copy of every field (the core's structs carry the
// proto's field names, so a field path the core reports is its wire path),
// enum values through the tables of enums.h. The only checks here are the
// size caps of refusals.h; everything else is the core's to check and decide
// (core::Certify, core::ValidateEvidence, core::ResolveCapacity, ...).
#ifndef RISKBOUND_SERVICE_RPC_CONVERT_H_
#define RISKBOUND_SERVICE_RPC_CONVERT_H_

#include <string>

#include "riskbound/v1/certify.pb.h"
#include "riskbound/v1/common.pb.h"
#include "service/core/certify.h"
#include "service/rpc/refusals.h"

namespace riskbound::rpc {

// CapacityFromProto
// Copies the capacity oneof (nothing set when it is unset) into `out`; a
// model description through ModelDescriptionFromProto (capacity_convert.h)
// at "<path>.model". `path` is the capacity's API path (e.g.
// "evidence.training.capacity").
void CapacityFromProto(const v1::Capacity& in, const std::string& path, core::ClassCapacity* out,
                       Refusals* refusals);

// EvidenceFromProto
// Copies every kind of evidence present; `prefix` is the evidence's API path
// ("evidence", "candidate.evidence").
void EvidenceFromProto(const v1::Evidence& in, const std::string& prefix, core::Evidence* out,
                       Refusals* refusals);

// CertifyRequestFromProto
// The core request. listed.families and listed.delta_weights over their caps
// (core/limits.h) are refused, before any entry is copied, with everything
// under "listed" left to them. Thread-safe.
Converted<core::CertifyRequest> CertifyRequestFromProto(const v1::CertifyRequest& in);

// SliceSharingFromProto
// Copies a SliceSharing found at `prefix` ("slice_sharing",
// "policy.slice_sharing"); an unset rule is the core's default, an unknown
// one nullopt (the core names it); more than kMaxSlices weights are refused.
void SliceSharingFromProto(const v1::SliceSharing& in, const std::string& prefix,
                           core::SliceSharing* out, Refusals* refusals);

// CertificateToProto
// Copies a certificate, with the family's name, source and assumptions from
// the core's registry (families.h).
void CertificateToProto(const core::Certificate& in, v1::Certificate* out);

// CertifyResponseToProto
// Copies a core result: certificates, the tightest, the accounting, the
// cautions (core::Cautions) and the engine version.
v1::CertifyResponse CertifyResponseToProto(const core::CertifyResult& result);

}  // namespace riskbound::rpc

#endif  // RISKBOUND_SERVICE_RPC_CONVERT_H_
