// Certify: every requested bound family on one model's evidence, the tightest
// of them, and the failure-probability (delta) accounting that makes the
// tightest one valid. Also the checks every entry point shares: evidence
// (ValidateEvidence, PrepareEvidence) and capacities (ResolveCapacity).
#ifndef RISKBOUND_SERVICE_CORE_CERTIFY_H_
#define RISKBOUND_SERVICE_CORE_CERTIFY_H_

#include <cstddef>
#include <optional>
#include <string>
#include <vector>

#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "service/core/evidence.h"
#include "service/core/field_violation.h"
#include "service/core/slices.h"
#include "service/core/stop.h"

namespace riskbound::core {

// Largest sample count accepted: 2^53, where counts are still exact doubles.
inline constexpr std::uint64_t kMaxSampleCount = 1ULL << 53;

// How the families to compute are chosen: the API's family_choice oneof.
enum class FamilyChoice {
  // Not set: one family picked from the kinds of evidence present (never from
  // their values), first match wins: hold-out -> exact binomial; else bounded
  // loss -> bounded kl; else compression scheme -> sample compression; else
  // PAC-Bayes -> PAC-Bayes-kl; else finite class -> Occam kl; else
  // Rademacher -> Rademacher; else relabel draws -> Rademacher (random
  // signs) or maximal discrepancy (half flip); else VC dimension -> VC
  // additive. It gets the whole failure probability.
  kRecommended,
  // `listed`: exactly the families listed by the caller.
  kListed,
  // `all_applicable`: every registered family whose evidence is present.
  kAllApplicable,
};

// An explicit list of bound families. API: FamilyList (CertifyRequest.listed).
struct FamilyList {
  // The families, each at most once. nullopt stands for an entry that names
  // no family (the API's BOUND_FAMILY_UNSPECIFIED, or a value this server
  // does not know); Certify refuses it at its position.
  std::vector<std::optional<Family>> families;
  // Optional: a weight per family (same order), each in (0, 1], summing to
  // at most 1; family j is computed at failure_probability * weight_j.
  // Empty: equal weights 1/K.
  std::vector<double> delta_weights;
};

// API: CertifyRequest; every field path Certify reports is its API path.
struct CertifyRequest {
  Evidence evidence;
  // Failure probability delta: certificates hold with probability >= 1 - delta.
  double failure_probability = 0.05;
  FamilyChoice family_choice = FamilyChoice::kRecommended;
  // kListed only.
  FamilyList listed;
  // How evidence.slices share their failure probability (slices only).
  SliceSharing slice_sharing;
};

// API: CertifyResponse (with DeltaAccounting).
struct CertifyResult {
  // One certificate per family computed, in registry order for kRecommended
  // and kAllApplicable, in the caller's order for kListed.
  std::vector<Certificate> certificates;
  // Index into certificates of the smallest upper bound (first on ties).
  // Bounded-loss certificates (Certificate::loss_range set, in the loss's
  // own units) are only candidates when no error-rate certificate was
  // computed: the two kinds bound different quantities. Heuristic
  // certificates (Certificate::heuristic) are only candidates when no other
  // certificate was computed.
  std::size_t tightest_index = 0;
  // The request's failure probability.
  double requested_failure_probability = 0.0;
  // The failure probability of the tightest certificate: the sum of the
  // shares spent (<= the requested one).
  double spent_failure_probability = 0.0;
  // How the failure probability was split, in plain words.
  std::string rule;
  // Set when the evidence has slices: a certificate per slice and the
  // worst-slice statement (slices.h). The slices get the whole failure
  // probability when the evidence holds nothing else, half of it otherwise
  // (the certificates above get the other half).
  std::optional<SliceSummary> slices;
  // Cautions for this answer: Cautions(), plus SliceCautions() with slices.
  std::vector<std::string> cautions;
};

// HasOverallEvidence
// True when `evidence` holds some kind of evidence besides slices.
bool HasOverallEvidence(const Evidence& evidence);

// CheckSampleCounts
// Appends violations for "<prefix>.sample_count" (must be in [1, 2^53]) and
// "<prefix>.error_count" (must be <= sample_count) to `out`.
void CheckSampleCounts(const std::string& prefix, const SampleCounts& counts,
                       std::vector<FieldViolation>* out);

// ResolveCapacity
// Turns the measure a caller gave into the one the bound families read, in
// place: hypothesis_count |H| becomes log_hypothesis_count ln |H|; a model
// description goes through the capacity catalogue (EstimateCapacity): a
// finite VC dimension (exact or an upper bound, an integer) becomes
// vc_dimension, a finite class log_hypothesis_count, and capacity->notes gets
// one note saying which capacity was used (value, exact or upper bound,
// formula, source). A resolved capacity passes unchanged.
// Appends violations named by their API paths under `path` (e.g.
// "evidence.training.capacity", "structure[3].capacity"): `path` itself
// when no measure is given, or two spellings of one (hypothesis_count with
// log_hypothesis_count, a model with a number; a core caller may give both
// the VC dimension and ln |H| of a class, the API's oneof gives one), "<path>.hypothesis_count"
// (0),
// "<path>.log_hypothesis_count" (not finite, < 0), "<path>.model" when the
// family has infinite VC dimension (with what to use instead) or a bound
// beyond 2^64, and the model's own "<path>.model.<field>" violations (at most
// kMaxListedViolations - 1 of them, then one on "<path>.model" counting the
// rest, so a model cannot crowd out the request's other violations).
// Returns true when it appended none. Thread-safe.
bool ResolveCapacity(ClassCapacity* capacity, const std::string& path,
                     std::vector<FieldViolation>* out);

// PrepareEvidence
// Resolves evidence->training's capacity (ResolveCapacity) and checks every
// field of the evidence; appends violations named "<prefix>.<field>" (prefix
// "evidence" in Certify, "candidate.evidence" in the gate). Returns true
// when it appended none. Thread-safe.
bool PrepareEvidence(Evidence* evidence, const std::string& prefix,
                     std::vector<FieldViolation>* out);

// ValidateEvidence
// PrepareEvidence on a copy: returns OK, or INVALID_ARGUMENT naming every bad
// field by its API path under `prefix` (see field_violation.h). Appends to
// `out` when it is not null.
absl::Status ValidateEvidence(const Evidence& evidence, std::vector<FieldViolation>* out = nullptr,
                              const std::string& prefix = "evidence");

// ValidateCertifyRequest
// Returns OK, or INVALID_ARGUMENT naming every bad field of `request` at once
// (the checks of Certify, without computing anything).
absl::Status ValidateCertifyRequest(const CertifyRequest& request);

// Certify
// Computes the chosen families and the tightest certificate. With K > 1
// families the tightest is a minimum over K bounds, valid only because each
// was computed at its share of the failure probability (union bound);
// result.rule says so.
// With slices (evidence.slices) the result also carries a certificate per
// slice (CertifySlices); with slices and other evidence the two parts get
// half the failure probability each, so everything reported holds together.
// Errors: INVALID_ARGUMENT naming every bad field at once: bad evidence
// ("evidence.<field>", "evidence.slices[i].<field>"), a bad slice_sharing
// ("slice_sharing.*", or any slice_sharing without slices), a
// failure_probability outside (0, 1), an unknown,
// duplicated or inapplicable listed family ("listed.families[i]"), bad
// weights ("listed.delta_weights[i]", "listed.delta_weights"). Never returns
// NaN or Inf in a certificate.
// Every family costs a bounded amount of CPU (numeric.h); `stop` is checked
// before each one, and a stopped call returns stop.Status() (CANCELLED or
// DEADLINE_EXCEEDED), never a partial result.
// Thread-safe; no shared state.
absl::StatusOr<CertifyResult> Certify(const CertifyRequest& request,
                                      const StopToken& stop = StopToken::Never());

// Cautions
// The plain-words cautions every answer carries (i.i.d. assumption, no
// protection against distribution shift, not a substitute for review).
const std::vector<std::string>& Cautions();

}  // namespace riskbound::core

#endif  // RISKBOUND_SERVICE_CORE_CERTIFY_H_
