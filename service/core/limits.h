// Size limits of a request: one cap per repeated field and per free-text
// string field of the riskbound.v1 requests.
//
// Each cap is far above what a real request needs, and is checked by the RPC
// conversion (service/rpc/*convert.cc) BEFORE any element-by-element work: a
// list or string over its cap is refused with ONE violation naming the field
// ("structure: at most 10000 entries, got 100000") and its elements are not
// looked at. Without the caps, a few megabytes of request (kilobytes when
// gzip-compressed) cost gigabytes of memory in per-element error messages and
// minutes of CPU.
//
// Every cap is stated on its proto field ("At most N entries; more is
// INVALID_ARGUMENT"). Keep the two in step.
//
// Repeated fields of the responses (certificates, notes, cautions, reasons,
// candidates, ...) are written by the server and bounded by these caps; the
// error details are bounded by kMaxListedViolations (field_violation.h).
#ifndef RISKBOUND_SERVICE_CORE_LIMITS_H_
#define RISKBOUND_SERVICE_CORE_LIMITS_H_

#include <cstddef>

namespace riskbound::core {

// CertifyRequest.listed.families (FamilyList.families). There are 16 bound
// families and each may be listed once.
inline constexpr std::size_t kMaxListedFamilies = 64;

// RelabelEvidence.draws (evidence.relabel.draws): retrainings of a
// relabel-and-retrain experiment.
inline constexpr std::size_t kMaxRelabelDrawCount = 100000;

// CertifyRequest.listed.delta_weights (FamilyList.delta_weights): one per
// listed family.
inline constexpr std::size_t kMaxListedDeltaWeights = 64;

// GateRequest.policy.allowed_families (GatePolicy.allowed_families). There
// are 16 bound families and each may be allowed once.
inline constexpr std::size_t kMaxAllowedFamilies = 64;

// SelectStructureRequest.structure: nested classes of one structure. Real
// structures have tens of candidates; the response carries one row each.
inline constexpr std::size_t kMaxStructureCandidates = 10000;

// SelectStructureRequest.weights: one per candidate.
inline constexpr std::size_t kMaxStructureWeights = kMaxStructureCandidates;

// ModelDescription.layer_widths, wherever a model description appears
// (EstimateCapacityRequest.model, Capacity.model in Certify, SelectStructure
// and PlanSamples): input width, one width per fully connected layer.
inline constexpr std::size_t kMaxLayerWidths = 1000;

// Evidence.slices (wherever evidence appears), SliceSharing.weights and
// GatePolicy.slice_max_risks: declared slices of a hold-out set. Their names
// are at most kMaxSliceNameBytes.
inline constexpr std::size_t kMaxSlices = 1000;
inline constexpr std::size_t kMaxSliceNameBytes = 128;

// Caller-chosen names, in bytes of UTF-8: StructureCandidate.id,
// GateCandidate.id and ChampionComparison.champion_id.
inline constexpr std::size_t kMaxIdBytes = 256;

}  // namespace riskbound::core

#endif  // RISKBOUND_SERVICE_CORE_LIMITS_H_
