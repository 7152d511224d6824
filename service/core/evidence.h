// Evidence and certificates: the plain data the bound families work on.
//
// These structs mirror the API messages of proto/riskbound/v1 so that the
// field paths in error messages ("evidence.holdout.error_count") are the same
// in the core and on the wire. They hold values only; validation lives in
// ValidateEvidence (certify.h).
#ifndef RISKBOUND_SERVICE_CORE_EVIDENCE_H_
#define RISKBOUND_SERVICE_CORE_EVIDENCE_H_

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

namespace riskbound::core {

// Errors observed on a number of samples (0-1 loss).
struct SampleCounts {
  std::uint64_t errors = 0;
  std::uint64_t samples = 0;
};

// The capacity of the class a training-set bound is uniform over. At most one
// measure is normally set; a family uses the one it needs.
struct ClassCapacity {
  // VC dimension h of the class.
  std::optional<std::uint64_t> vc_dimension;
  // Natural logarithm of the number of hypotheses, ln |H|, of a finite class
  // fixed before the training sample was seen.
  std::optional<double> log_hypothesis_count;
};

// Errors on the training sample plus the capacity of the class the model was
// chosen from.
struct TrainingEvidence {
  SampleCounts counts;
  ClassCapacity capacity;
};

// Everything a caller knows about one trained classifier.
struct Evidence {
  // Errors on a hold-out set drawn after the model was fixed.
  std::optional<SampleCounts> holdout;
  // Errors on the training sample, with the capacity of the class.
  std::optional<TrainingEvidence> training;
  // Error rate of a trivial classifier on the same task (e.g. always
  // predicting the majority class). A certificate at or above it is vacuous.
  std::optional<double> baseline_error_rate;
};

// The bound families. Values are stable: they are stored in audit records.
enum class Family {
  kHoldoutExactBinomial = 1,
  kHoldoutHoeffding = 2,
  kHoldoutKlChernoff = 3,
  kVcAdditive = 4,
  kVcRelative = 5,
  kOccamHoeffding = 6,
  kOccamKl = 7,
};

// A certificate: an upper bound on a model's true error that holds with
// probability at least 1 - delta over the draw of the sample.
struct Certificate {
  Family family = Family::kHoldoutExactBinomial;
  // Upper bound on the true error, clipped to [0, 1].
  double upper_bound = 1.0;
  // One-sided lower bound at the same delta, for families that have one.
  // Upper and lower together hold with probability >= 1 - 2 delta.
  std::optional<double> lower_bound;
  // The failure probability this certificate was computed at.
  double delta = 0.0;
  // Errors divided by samples on the sample the family uses.
  double empirical_risk = 0.0;
  // upper_bound - empirical_risk.
  double penalty = 0.0;
  // True when the bound says nothing: upper bound >= 1, or >= the baseline
  // error rate when one was given.
  bool vacuous = false;
  // False when a conservative relaxation stood in for an exact computation.
  bool exact = true;
  // Plain-words remarks (relaxations used, regime warnings).
  std::vector<std::string> notes;
};

// EmpiricalRate
// Returns errors / samples. REQUIRES: counts.samples >= 1.
inline double EmpiricalRate(const SampleCounts& counts) {
  return static_cast<double>(counts.errors) / static_cast<double>(counts.samples);
}

// MakeCertificate
// Builds a certificate from raw limits: clips both to [0, 1] (a NaN limit
// becomes the trivial 1 or 0), keeps lower <= empirical risk <= upper, sets
// penalty and the vacuous flag (upper >= 1).
Certificate MakeCertificate(Family family, double delta, double empirical_risk,
                            double upper_bound,
                            std::optional<double> lower_bound);

}  // namespace riskbound::core

#endif  // RISKBOUND_SERVICE_CORE_EVIDENCE_H_
