// Conversion between the riskbound.v1 gate messages (gate.proto) and the core
// gate (service/core/gate.h), the canonical request digest, and the audit
// record. The decision itself is core::DecideGate; nothing here decides.
#ifndef RISKBOUND_SERVICE_RPC_GATE_CONVERT_H_
#define RISKBOUND_SERVICE_RPC_GATE_CONVERT_H_

#include <optional>
#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "absl/strings/string_view.h"
#include "absl/time/time.h"
#include "riskbound/v1/gate.pb.h"
#include "service/core/gate.h"

namespace riskbound::rpc {

// The core inputs of one gate call.
struct GateInputs {
  core::GatePolicy policy;
  core::GateCandidate candidate;
  std::optional<core::ChampionComparison> champion;
};

// GateInputsFromProto
// Returns the core inputs, or INVALID_ARGUMENT listing every bad field the
// wire shape alone can show (e.g. policy.allowed_families[i] out of the enum,
// a missing comparison oneof is left to the core), together with every
// violation core::DecideGate's validation finds, so one call names them all.
// Paths: policy.*, candidate.*, champion.*. Sizes are checked first
// (core/limits.h): more than kMaxAllowedFamilies allowed families is one
// violation "policy.allowed_families" and nothing else of the policy is
// judged; candidate.id or champion.champion_id over kMaxIdBytes is named.
// Thread-safe.
absl::StatusOr<GateInputs> GateInputsFromProto(const v1::GateRequest& in);

// CanonicalGateRequestBytes
// Returns the canonical byte form of `request`: a copy with unknown fields
// dropped, in protobuf's deterministic binary serialization (see
// AuditRecord.request_sha256 in gate.proto). Thread-safe.
std::string CanonicalGateRequestBytes(const v1::GateRequest& request);

// Sha256Hex
// Returns the SHA-256 digest of `bytes` as 64 lower-case hex digits
// (OpenSSL libcrypto). Source: FIPS 180-4. Thread-safe.
std::string Sha256Hex(absl::string_view bytes);

// FormatAuditTimestamp
// Returns `t` in RFC 3339, UTC, with the fractional seconds it has
// ("2026-03-01T12:00:00Z", "2026-03-01T12:00:00.25Z"). Thread-safe.
std::string FormatAuditTimestamp(absl::Time t);

// GateCautions
// The cautions every gate answer carries: core::Cautions() and the gate's
// own (policy fixed in advance, hold-out set used once).
const std::vector<std::string>& GateCautions();

// GateResponseToProto
// Returns the response for `decision` on `request`: verdict, reasons, bounds,
// ledger, and the audit record (engine version, digest of the canonical
// request, families used, failure probability spent, `now` as the timestamp,
// cautions). `now` is a parameter so tests can fix it. Thread-safe.
v1::GateResponse GateResponseToProto(const core::GateDecision& decision,
                                     const v1::GateRequest& request, absl::Time now);

}  // namespace riskbound::rpc

#endif  // RISKBOUND_SERVICE_RPC_GATE_CONVERT_H_
