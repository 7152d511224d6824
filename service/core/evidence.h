// Evidence and certificates: the plain data the bound families work on.
//
// These structs mirror the API messages of proto/riskbound/v1 field by field,
// with the proto's field names, so that a field path in an error message
// ("evidence.holdout.error_count") is the same in the core and on the wire.
// They hold values only; validation lives in ValidateEvidence (certify.h).
#ifndef RISKBOUND_SERVICE_CORE_EVIDENCE_H_
#define RISKBOUND_SERVICE_CORE_EVIDENCE_H_

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "service/core/capacity.h"

namespace riskbound::core {

// Errors observed on a number of samples (0-1 loss). API: HoldoutEvidence
// (evidence.holdout, champion.champion_holdout), and the counts of
// TrainingEvidence, RademacherEvidence and StructureCandidate.
struct SampleCounts {
  std::uint64_t error_count = 0;
  std::uint64_t sample_count = 0;
};

// The capacity of the class a training-set bound is uniform over. API:
// Capacity, whose `measure` oneof sets exactly one of the first four fields.
// ResolveCapacity (certify.h) turns hypothesis_count and model into the two
// measures the bound families read (vc_dimension, log_hypothesis_count); the
// core's entry points resolve before they compute.
struct ClassCapacity {
  // VC dimension h of the class.
  std::optional<std::uint64_t> vc_dimension;
  // Number of hypotheses |H| of a finite class, >= 1.
  std::optional<std::uint64_t> hypothesis_count;
  // Natural logarithm of the number of hypotheses, ln |H|, of a finite class
  // fixed before the training sample was seen.
  std::optional<double> log_hypothesis_count;
  // The architecture of the class, turned into a capacity with the capacity
  // catalogue (capacity.h).
  std::optional<ModelDescription> model;
  // Where the capacity came from, in plain words (e.g. "capacity used: VC
  // dimension h <= 41 ... from the capacity catalogue"), set by
  // ResolveCapacity for a model description. Certify appends these to the
  // notes of every certificate that uses this capacity (the VC and Occam
  // families). Empty for a capacity the caller gave as a number.
  std::vector<std::string> notes;
};

// Errors on the training sample plus the capacity of the class the model was
// chosen from. API paths: evidence.training.{error_count, sample_count,
// capacity}.
struct TrainingEvidence : SampleCounts {
  ClassCapacity capacity;
};

// Per-example losses of one fixed model on a hold-out set, for a loss bounded
// in [loss_min, loss_max] (not 0-1): clipped losses, Brier score, per-example
// costs. API paths: evidence.bounded_loss.{mean_loss, sample_variance,
// sample_count, loss_min, loss_max}.
struct BoundedLossEvidence {
  // Mean of the per-example losses, in the loss's own units.
  double mean_loss = 0.0;
  // Unbiased (ddof = 1) sample variance of the per-example losses, in the
  // loss's units squared. Ignored when sample_count = 1.
  double sample_variance = 0.0;
  // Number of hold-out examples n.
  std::uint64_t sample_count = 0;
  // The range every per-example loss lies in, fixed before the data were
  // seen. The API's loss_min and loss_max are optional: unset is [0, 1],
  // these defaults.
  double loss_min = 0.0;
  double loss_max = 1.0;
};

// Which classifier a PAC-Bayes certificate is about.
enum class PacBayesTarget {
  // The Gibbs (randomized) classifier: a fresh h ~ Q for every prediction.
  kGibbs = 0,
  // The Q-weighted majority vote, R(MV_Q) <= 2 R(Q).
  kMajorityVote = 1,
};

// A PAC-Bayes posterior Q against a prior P fixed before the sample was seen.
// API paths: evidence.pac_bayes.{kl_divergence, gibbs_empirical_risk,
// sample_count, target}.
struct PacBayesEvidence {
  // KL(Q || P) in nats.
  double kl_divergence = 0.0;
  // E_{h~Q} R_emp(h) on the m training examples, in [0, 1].
  double gibbs_empirical_risk = 0.0;
  // Number of training examples m (not counting data the prior was fit on).
  std::uint64_t sample_count = 0;
  // Which classifier the certificate is about. Required: nullopt (the API's
  // PAC_BAYES_TARGET_UNSPECIFIED, or a value this server does not know) is
  // refused by ValidateEvidence. Core callers get the Gibbs classifier unless
  // they say otherwise.
  std::optional<PacBayesTarget> target = PacBayesTarget::kGibbs;
};

// Training errors plus the empirical Rademacher complexity of the hypothesis
// class on the same sample. API paths: evidence.rademacher.{error_count,
// sample_count, empirical_rademacher, sigma_draw_count}.
struct RademacherEvidence : SampleCounts {
  // Rhat_S(H) = E_sigma sup_h (1/m) sum_i sigma_i h(x_i) for the {-1, +1}
  // valued hypothesis class (Mohri et al. convention: no absolute value, no
  // factor 2), with the supremum computed exactly.
  double empirical_rademacher = 0.0;
  // 0: empirical_rademacher is the exact expectation over sigma. N > 0: it is
  // the average over N independent sigma draws (McDiarmid slack added).
  std::uint64_t sigma_draw_count = 0;
};

// How the labels were changed before each retraining of a relabel-and-retrain
// experiment. API: RelabelScheme.
enum class RelabelScheme {
  // Each label multiplied by an independent fair sign: the empirical
  // Rademacher complexity (family kRademacher).
  kRandomSigns = 1,
  // The labels of a half fixed in advance flipped: the maximal discrepancy
  // (family kMaximalDiscrepancy).
  kHalfFlip = 2,
};

// How each retraining minimised the 0-1 training error. API: RelabelTraining.
enum class RelabelTraining {
  // The minimum over the whole class was reached every time: a valid bound.
  kExact = 1,
  // A heuristic optimiser: the capacity is underestimated and the
  // certificate is heuristic (not a bound).
  kApproximate = 2,
};

// One retraining. API: RelabelDraw; paths evidence.relabel.draws[j].*.
struct RelabelDraw {
  // Random signs: errors against the relabelled sample.
  std::uint64_t relabelled_error_count = 0;
  // Half flip: errors on the flipped half and on the kept half, each against
  // the original labels.
  std::uint64_t flipped_half_error_count = 0;
  std::uint64_t kept_half_error_count = 0;
};

// Training errors of the model plus the raw draws of a relabel-and-retrain
// experiment on the same sample. API paths: evidence.relabel.{error_count,
// sample_count, scheme, training, draws}. scheme and training are required:
// nullopt (unset or unknown on the wire) is refused by ValidateEvidence.
struct RelabelEvidence : SampleCounts {
  std::optional<RelabelScheme> scheme;
  std::optional<RelabelTraining> training;
  std::vector<RelabelDraw> draws;
};

// A sample-compression scheme: the model is rebuilt from compression_size of
// the training examples by a reconstruction fixed before the data were seen.
// API paths: evidence.compression.{sample_count, compression_size,
// outside_error_count, size_fixed_in_advance}.
struct CompressionEvidence {
  // Number of training examples m.
  std::uint64_t sample_count = 0;
  // Size d of the compression set (e.g. the number of support vectors).
  std::uint64_t compression_size = 0;
  // Errors k of the reconstructed model on the m - d examples outside it.
  std::uint64_t outside_error_count = 0;
  // True when d was chosen before the sample was seen (saves a factor m).
  bool size_fixed_in_advance = false;
};

// Hold-out counts of one declared slice of the hold-out set (a region,
// segment or input type). Slices are disjoint and fixed before the hold-out
// set was seen. API: SliceEvidence; paths <evidence>.slices[i].{name,
// error_count, sample_count}.
struct SliceEvidence : SampleCounts {
  std::string name;
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
  // Mean of a bounded (non 0-1) loss on a hold-out set.
  std::optional<BoundedLossEvidence> bounded_loss;
  // A PAC-Bayes posterior and its Gibbs empirical risk.
  std::optional<PacBayesEvidence> pac_bayes;
  // Training errors and the empirical Rademacher complexity.
  std::optional<RademacherEvidence> rademacher;
  // A sample-compression scheme.
  std::optional<CompressionEvidence> compression;
  // Raw draws of a relabel-and-retrain experiment (capacity from the data).
  std::optional<RelabelEvidence> relabel;
  // Hold-out counts per declared slice (slices.h).
  std::vector<SliceEvidence> slices;
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
  kBoundedHoeffding = 8,
  kBoundedKl = 9,
  kBoundedEmpiricalBernstein = 10,
  kPacBayesMcAllester = 11,
  kPacBayesKl = 12,
  kPacBayesCatoni = 13,
  kRademacher = 14,
  kSampleCompression = 15,
  kHoldoutAnytime = 16,
  kMaximalDiscrepancy = 17,
};

// The range [loss_min, loss_max] of a bounded loss. API: LossRange.
struct LossRange {
  double loss_min = 0.0;
  double loss_max = 1.0;
};

// A certificate: an upper bound on a model's true error that holds with
// probability at least 1 - failure_probability over the draw of the sample.
// API: Certificate (family_name, source and assumptions come from the
// family's registry row, families.h).
struct Certificate {
  Family family = Family::kHoldoutExactBinomial;
  // Upper bound on the true error, clipped to [0, 1]; for bounded-loss
  // families, on the expected loss, clipped to loss_range.
  double risk_upper_bound = 1.0;
  // One-sided lower bound at the same failure probability, for families that
  // have one. Upper and lower together hold with probability
  // >= 1 - 2 failure_probability.
  std::optional<double> risk_lower_bound;
  // The failure probability this certificate was computed at.
  double failure_probability = 0.0;
  // Errors divided by samples on the sample the family uses.
  double empirical_risk = 0.0;
  // risk_upper_bound - empirical_risk.
  double penalty = 0.0;
  // True when the bound says nothing: upper bound >= 1 (the top of
  // loss_range), or >= the baseline error rate when one was given.
  bool vacuous = false;
  // False when a conservative relaxation stood in for an exact computation.
  bool exact = true;
  // Plain-words remarks (relaxations used, regime warnings).
  std::vector<std::string> notes;
  // Set only for the bounded-loss families (kBounded*): the certificate
  // bounds the expected value of a bounded loss in its own units within this
  // range, not a 0-1 error rate; such bounds are never compared with
  // error-rate bounds or with baseline_error_rate.
  std::optional<LossRange> loss_range;
  // True when a condition of the bound is not met (relabel evidence from
  // approximate training): the number is an estimate, not a bound. Certify
  // prefers any valid certificate as the tightest; the gate refuses it.
  bool heuristic = false;
};

// EmpiricalRate
// Returns error_count / sample_count. REQUIRES: counts.sample_count >= 1.
inline double EmpiricalRate(const SampleCounts& counts) {
  return static_cast<double>(counts.error_count) / static_cast<double>(counts.sample_count);
}

// MakeCertificate
// Builds a certificate from raw limits: clips both to [0, 1] (a NaN limit
// becomes the trivial 1 or 0), keeps lower <= empirical risk <= upper, sets
// penalty and the vacuous flag (upper >= 1).
Certificate MakeCertificate(Family family, double delta, double empirical_risk,
                            double upper_bound,
                            std::optional<double> lower_bound);

// MakeCertificateInRange
// As MakeCertificate for a quantity in [range_min, range_max] (a bounded
// loss in its own units): clips the limits and the empirical value to the
// range (a NaN upper limit becomes range_max, a NaN lower limit range_min),
// keeps lower <= empirical <= upper, sets vacuous iff upper >= range_max, and
// records the range in loss_range.
// REQUIRES: range_min < range_max, both finite.
Certificate MakeCertificateInRange(Family family, double delta, double empirical,
                                   double upper_bound,
                                   std::optional<double> lower_bound,
                                   double range_min, double range_max);

}  // namespace riskbound::core

#endif  // RISKBOUND_SERVICE_CORE_EVIDENCE_H_
