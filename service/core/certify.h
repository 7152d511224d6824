// Certify: every requested bound family on one model's evidence, the tightest
// of them, and the failure-probability (delta) accounting that makes the
// tightest one valid.
#ifndef RISKBOUND_SERVICE_CORE_CERTIFY_H_
#define RISKBOUND_SERVICE_CORE_CERTIFY_H_

#include <cstddef>
#include <string>
#include <vector>

#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "service/core/evidence.h"
#include "service/core/field_violation.h"
#include "service/core/stop.h"

namespace riskbound::core {

// Largest sample count accepted: 2^53, where counts are still exact doubles.
inline constexpr std::uint64_t kMaxSampleCount = 1ULL << 53;

// How the families to compute are chosen.
enum class FamilyChoice {
  // One family picked from the kinds of evidence present (never from their
  // values), first match wins: hold-out -> exact binomial; else bounded loss
  // -> bounded kl; else compression scheme -> sample compression; else
  // PAC-Bayes -> PAC-Bayes-kl; else finite class -> Occam kl; else
  // Rademacher -> Rademacher; else VC dimension -> VC additive. It gets the
  // whole delta.
  kRecommended,
  // Exactly the families listed by the caller.
  kListed,
  // Every registered family whose evidence is present.
  kAllApplicable,
};

struct CertifyRequest {
  Evidence evidence;
  // Failure probability delta: certificates hold with probability >= 1 - delta.
  double failure_probability = 0.05;
  FamilyChoice choice = FamilyChoice::kRecommended;
  // kListed only: the families, each at most once.
  std::vector<Family> families;
  // kListed only, optional: a weight per family (same order), each > 0,
  // summing to at most 1; family j is computed at delta * weight_j. Empty
  // means equal weights 1/K.
  std::vector<double> delta_weights;
};

struct CertifyResult {
  // One certificate per family computed, in registry order for kRecommended
  // and kAllApplicable, in the caller's order for kListed.
  std::vector<Certificate> certificates;
  // Index into certificates of the smallest upper bound (first on ties).
  // Bounded-loss certificates (Certificate::bounded_loss_units, in the loss's
  // own units) are only candidates when no error-rate certificate was
  // computed: the two kinds bound different quantities.
  std::size_t tightest_index = 0;
  // The failure probability of the tightest certificate: the sum of the
  // deltas spent (<= the requested delta).
  double spent_failure_probability = 0.0;
  // How delta was split, in plain words.
  std::string rule;
};

// CheckSampleCounts
// Appends violations for "<prefix>.sample_count" (must be in [1, 2^53]) and
// "<prefix>.error_count" (must be <= sample_count) to `out`.
void CheckSampleCounts(const std::string& prefix, const SampleCounts& counts,
                       std::vector<FieldViolation>* out);

// ValidateEvidence
// Returns OK, or INVALID_ARGUMENT naming every bad field by its API path
// (see field_violation.h). Appends to `out` when it is not null.
absl::Status ValidateEvidence(const Evidence& evidence,
                              std::vector<FieldViolation>* out = nullptr);

// Certify
// Computes the chosen families and the tightest certificate. With K > 1
// families the tightest is a minimum over K bounds, valid only because each
// was computed at its share of delta (union bound); result.rule says so.
// Errors: INVALID_ARGUMENT naming the field for bad evidence, a delta outside
// (0, 1), an unknown, duplicated or inapplicable listed family, or bad
// weights. Never returns NaN or Inf in a certificate.
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
