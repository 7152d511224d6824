// The effective VC dimension fit of Vapnik, Levin & LeCun (1994): a HEURISTIC
// capacity estimate from retraining a learner on randomly labelled samples.
// It is NOT a bound: the curve it fits is an upper-bound shape used as an
// equality and calibrated on linear classifiers (with exact training on 1-D
// thresholds, true VC dimension 2, the fit returns about 2.64). Nothing in
// Certify, Gate or any certificate reads it.
//
// The experiment, for half-sizes n over a design spanning roughly
// 0.5 <= n/h <= 30, repeated: draw 2n randomly labelled points, flip the labels
// of the second half, train to minimise the training error, and record
// xi = |error rate on half 1 - error rate on half 2| under the original
// labels. The fit minimises sum_i (mean xi(n_i) - Phi(n_i / h))^2 over h.
// Shao, Cherkassky & Li (2000), Neural Computation 12(8), discuss choosing
// the design points.
#ifndef RISKBOUND_SERVICE_CORE_EFFECTIVE_VC_H_
#define RISKBOUND_SERVICE_CORE_EFFECTIVE_VC_H_

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "service/core/evidence.h"
#include "service/core/stop.h"

namespace riskbound::core {

// Constants of the curve: a = 0.16, b = 1.2 (Vapnik, Levin & LeCun 1994),
// FROM MEMORY: neither the paper nor a secondary source stating them (Shao,
// Cherkassky & Li 2000; Cherkassky & Mulier, Learning from Data) could be
// read; only Shao et al.'s abstract, which confirms the procedure (fitting
// the theoretical formula to error-frequency measurements on artificial data
// sets of varying sizes), not the constants. k is derived: Phi(0.5) = 1,
// i.e. a (ln 1 + 1)/(1/2 - k) (sqrt(1 + b (1/2 - k)) + 1) = 1, solves to
// k = 1/2 - 2a - a^2 b = 0.14928.
inline constexpr double kVllA = 0.16;
inline constexpr double kVllB = 1.2;
inline constexpr double kVllK = 0.5 - 2.0 * kVllA - kVllA * kVllA * kVllB;

// VllPhi
// Phi(tau) = 1 for tau < 0.5, else
//   a (ln(2 tau) + 1) / (tau - k) * (sqrt(1 + b (tau - k) / (ln(2 tau) + 1)) + 1).
// REQUIRES: tau finite and >= 0. Pure.
double VllPhi(double tau);

// One design point: a half-size n and the deviations xi measured at it (one
// per repetition). API: DeviationPoint; paths design_points[i].*.
struct DeviationPoint {
  std::uint64_t half_sample_count = 0;
  std::vector<double> deviations;
};

// API: FitEffectiveVcDimensionRequest.
struct EffectiveVcRequest {
  std::vector<DeviationPoint> design_points;
  // Required: whether every retraining reached the minimum training error.
  std::optional<RelabelTraining> training;
  // Bootstrap resamples over the repetitions; 0: 1000.
  std::uint64_t bootstrap_resample_count = 0;
  // Level of the bootstrap percentile interval, in (0, 1); nullopt: 0.95.
  std::optional<double> interval_level;
  // Seed of the bootstrap's generator (splitmix64), so answers repeat.
  std::uint64_t seed = 0;
};

// One design point of the answer. API: DeviationFit.
struct DeviationFit {
  std::uint64_t half_sample_count = 0;
  double mean_deviation = 0.0;
  // Phi(n / h_hat).
  double fitted_deviation = 0.0;
  // mean_deviation - fitted_deviation.
  double residual = 0.0;
};

// API: FitEffectiveVcDimensionResponse.
struct EffectiveVcFit {
  // h_hat, the least-squares fit (for a censored input: 2 n_max, a lower
  // limit only).
  double effective_vc_dimension = 0.0;
  // Bootstrap percentile interval over the repetitions: sampling noise only,
  // never the error of the curve itself.
  double interval_lower = 0.0;
  double interval_upper = 0.0;
  double interval_level = 0.95;
  std::uint64_t bootstrap_resample_count = 0;
  std::vector<DeviationFit> points;
  // sqrt(mean residual^2).
  double rms_residual = 0.0;
  // Every mean deviation is near 1 (or the fit sits where Phi = 1 at every
  // design point): the data only say h >= 2 n_max.
  bool censored = false;
  // rms_residual > kPoorFitRms.
  bool poor_fit = false;
  // Fewer than 3 design points with 0.5 <= n / h_hat <= 30.
  bool few_informative_points = false;
  // training was approximate: h_hat is then biased low.
  bool approximate_training = false;
  // Plain words, the first always "heuristic, not a bound ...".
  std::vector<std::string> notes;
};

inline constexpr double kPoorFitRms = 0.05;
inline constexpr std::size_t kMaxDesignPoints = 1000;
inline constexpr std::size_t kMaxDeviationCount = 100000;
inline constexpr std::uint64_t kMaxBootstrapResamples = 10000;

// FitEffectiveVcDimension
// Returns the fit above. Errors: INVALID_ARGUMENT naming every bad field
// (design_points: at least 2 with distinct half_sample_count >= 1;
// design_points[i].deviations: at least one, each finite in [0, 1] (in
// total at most 100000); training required; bootstrap_resample_count <=
// 10000; interval_level in (0, 1)). Stops with stop's status. Thread-safe.
absl::StatusOr<EffectiveVcFit> FitEffectiveVcDimension(const EffectiveVcRequest& request,
                                                       const StopToken& stop);

}  // namespace riskbound::core

#endif  // RISKBOUND_SERVICE_CORE_EFFECTIVE_VC_H_
