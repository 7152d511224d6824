// Conversion between the riskbound.v1 messages and the core structs, with the
// request checks that only the wire shape can fail (a zero hypothesis count,
// a missing capacity oneof). Semantic checks live in the core
// (core::ValidateEvidence, core::Certify) and run here too, so one call
// returns every violation of a request at once.
#ifndef RISKBOUND_SERVICE_RPC_CONVERT_H_
#define RISKBOUND_SERVICE_RPC_CONVERT_H_

#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "riskbound/v1/certify.pb.h"
#include "riskbound/v1/common.pb.h"
#include "service/core/certify.h"
#include "service/core/field_violation.h"

namespace riskbound::rpc {

// CapacityFromProto
// Fills `out` from the capacity oneof; appends violations named
// "<prefix>.<field>" (e.g. prefix "evidence.training.capacity"). A missing
// measure is left for the core's validation to name. A model description goes
// through the capacity catalogue (ModelCapacityFromProto, capacity_convert.h):
// a finite VC dimension or ln |H| with a provenance note in out->notes, or a
// violation named "<prefix>.model..." (infinite VC dimension, a bound beyond
// 2^64, or a bad model field such as "<prefix>.model.layer_widths[1]").
void CapacityFromProto(const v1::Capacity& in, const std::string& prefix,
                       core::ClassCapacity* out, std::vector<core::FieldViolation>* violations);

// EvidenceFromProto
// Fills `out` from the evidence message; appends the violations only the
// wire shape can show, named "<prefix>.<field>" (e.g. prefix "evidence" or
// "candidate.evidence"). The semantic checks are core::ValidateEvidence's.
void EvidenceFromProto(const v1::Evidence& in, const std::string& prefix, core::Evidence* out,
                       std::vector<core::FieldViolation>* violations);

// CertifyRequestFromProto
// Returns the core request, or INVALID_ARGUMENT listing every bad field by its
// path (see core/field_violation.h). Lists over their caps (core/limits.h:
// listed.families, listed.delta_weights, a model's layer_widths) are refused
// with one violation each before their entries are looked at. Thread-safe.
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
