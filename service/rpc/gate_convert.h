// Conversion between the riskbound.v1 gate messages (gate.proto) and the core
// gate (service/core/gate.h), a mechanical copy both ways; the canonical
// request digest and the audit record. The decision, its checks, defaults
// and cautions are core::DecideGate's; nothing here decides.
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
#include "service/rpc/refusals.h"

namespace riskbound::rpc {

// The core inputs of one gate call.
struct GateInputs {
  core::GatePolicy policy;
  core::GateCandidate candidate;
  std::optional<core::ChampionComparison> champion;
};

// GateInputsFromProto
// The core inputs. Sizes are checked first (core/limits.h): more than
// kMaxAllowedFamilies allowed families is refused at
// "policy.allowed_families" (none copied; the core's findings on the list,
// and on whether the policy's families can use the evidence, are left out);
// candidate.id or champion.champion_id over kMaxIdBytes is refused and copied
// cut to the cap; a model's layer_widths over its cap as in
// ModelDescriptionFromProto. Thread-safe.
Converted<GateInputs> GateInputsFromProto(const v1::GateRequest& in);

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

// GateResponseToProto
// Copies `decision` on `request`: verdict, reasons, bounds, ledger, and the
// audit record (engine version, digest of the canonical request, families
// used, failure probability spent, `now` as the timestamp, the core's
// cautions, `request_id`). `now` is a parameter so tests can fix it.
// Thread-safe.
v1::GateResponse GateResponseToProto(const core::GateDecision& decision,
                                     const v1::GateRequest& request, absl::Time now,
                                     absl::string_view request_id);

}  // namespace riskbound::rpc

#endif  // RISKBOUND_SERVICE_RPC_GATE_CONVERT_H_
