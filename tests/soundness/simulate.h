// Monte-Carlo soundness harness: simulate many datasets at a KNOWN true risk,
// compute what riskbound reports on each, and count how often the reported
// upper bound covers the true risk.
//
// A family is sound at failure probability delta when its coverage is at
// least 1 - delta. With T simulated datasets the measured coverage carries a
// Monte-Carlo error of sqrt(delta (1 - delta) / T), so a scenario passes when
//   coverage >= 1 - delta - 3 sqrt(delta (1 - delta) / T)      (MonteCarloFloor)
// Where the sampling distribution of the evidence is a single binomial (the
// hold-out families) the coverage is also computed EXACTLY by summing the
// binomial pmf (Boost.Math), with no Monte-Carlo error at all.
//
// Every scenario is a pure function of (trials, seed): std::mt19937_64 seeded
// through std::seed_seq, std::binomial_distribution for counts, Beta draws as
// a ratio of two gamma draws. The same scenarios back the fast gtest
// (soundness_test.cc) and the full-mode report binary (soundness_report.cc).
#ifndef RISKBOUND_TESTS_SOUNDNESS_SIMULATE_H_
#define RISKBOUND_TESTS_SOUNDNESS_SIMULATE_H_

#include <array>
#include <cstdint>
#include <functional>
#include <optional>
#include <random>
#include <string>
#include <vector>

#include "service/core/evidence.h"

namespace riskbound::soundness {

using Rng = std::mt19937_64;

// MonteCarloFloor
// Returns 1 - delta - 3 sqrt(delta (1 - delta) / trials): the smallest
// measured coverage that is consistent (at three standard errors) with a true
// coverage of at least 1 - delta.
// REQUIRES: 0 < delta < 1, trials >= 1.
double MonteCarloFloor(double delta, std::int64_t trials);

// One measured figure: a family (or Certify's tightest certificate) on one
// simulated setup.
struct CoverageRow {
  std::string scenario;  // e.g. "hold-out n=1000 p=0.05"
  std::string family;    // family slug, or "certify all-applicable (K=3)"
  std::string target;    // what must be covered: "fixed classifier", "ERM choice", ...
  std::int64_t trials = 0;
  double delta = 0.05;
  // Mean over trials of the true risk that had to be covered (constant for a
  // fixed classifier; varies with the data for a data-chosen one).
  double mean_true_risk = 0.0;
  double mean_bound = 0.0;
  double coverage = 0.0;
  // MonteCarloFloor(delta, trials) unless the row is exact.
  double floor = 0.0;
  // Coverage summed over the exact sampling distribution, when available.
  std::optional<double> exact_coverage;
  // A published value to compare exact_coverage with, and where it is from.
  std::optional<double> reference_value;
  // True when reference_value is itself an exact coverage (comparable to
  // exact_coverage to its printed digits); false for a published Monte-Carlo
  // figure, which is shown for information only.
  bool reference_is_exact = false;
  std::string reference_source;
  std::string note;
};

// CheckRow
// The pass criteria of the harness, shared by the fast test and the report.
// Returns one plain-words line per failed criterion (empty = pass):
//  * Monte-Carlo rows (trials > 0): coverage >= MonteCarloFloor(delta, trials);
//  * rows with exact_coverage: exact_coverage >= 1 - delta (1e-12 rounding
//    slack); with trials > 0 also |coverage - exact| <= 4 standard errors + 1/T
//    (the simulator agrees with the exact sampling distribution);
//  * rows with an exact reference value: |exact - reference| <= 5e-5 (the
//    reference is printed to 4 decimals);
//  * mean_bound finite.
std::vector<std::string> CheckRow(const CoverageRow& row);

// DescribeRow
// One line with every figure of the row.
std::string DescribeRow(const CoverageRow& row);

// Counts covered trials and sums bounds and true risks.
class Tally {
 public:
  void Add(double bound, double true_risk) {
    ++trials_;
    if (bound >= true_risk) ++covered_;
    bound_sum_ += bound;
    risk_sum_ += true_risk;
  }
  // Adds a trial whose coverage event was decided elsewhere (uniform checks).
  void AddEvent(bool covered, double bound, double true_risk) {
    ++trials_;
    if (covered) ++covered_;
    bound_sum_ += bound;
    risk_sum_ += true_risk;
  }
  CoverageRow Row(std::string scenario, std::string family, std::string target,
                  double delta) const;

 private:
  std::int64_t trials_ = 0;
  std::int64_t covered_ = 0;
  double bound_sum_ = 0.0;
  double risk_sum_ = 0.0;
};

// MakeRng
// A generator seeded from (seed, stream) through std::seed_seq, so that every
// scenario draws from its own reproducible stream.
Rng MakeRng(std::uint64_t seed, std::uint64_t stream);

// DrawBinomial
// One Bin(n, p) count (std::binomial_distribution).
std::uint64_t DrawBinomial(Rng& rng, std::uint64_t n, double p);

// DrawBeta
// One Beta(a, b) draw as X / (X + Y), X ~ Gamma(a, 1), Y ~ Gamma(b, 1).
// REQUIRES: a > 0, b > 0.
double DrawBeta(Rng& rng, double a, double b);

// ExactBinomialCoverage
// Returns sum over k = 0..n of P(Bin(n, p) = k) * 1[bound(k) >= p], with the
// pmf from Boost.Math (boost::math::pdf of binomial_distribution).
double ExactBinomialCoverage(std::uint64_t n, double p,
                             const std::function<double(std::uint64_t)>& bound);

// ---------------------------------------------------------------------------
// The threshold class: 101 classifiers h_j(x) = 1[x > j/100], j = 0..100, on
// x ~ U[0, 1] with label y = 1[x > 1/2] flipped with probability `noise`.
inline constexpr int kThresholdCount = 101;

// ThresholdValue
// t_j = j / 100.
double ThresholdValue(int j);

// ThresholdTrueRisk
// The true 0-1 risk of x -> 1[x > t] in the model above, in closed form:
// noise + (1 - 2 noise) |t - 1/2| for t in [0, 1] (the classifier disagrees
// with the noiseless label on an interval of length |t - 1/2|, where it errs
// with probability 1 - noise; elsewhere it errs with probability noise).
double ThresholdTrueRisk(double t, double noise);

struct LabeledSample {
  std::vector<double> x;
  std::vector<int> y;  // 0 or 1
};

// DrawThresholdSample
// m i.i.d. draws of (x, y) from the model above.
LabeledSample DrawThresholdSample(Rng& rng, std::uint64_t m, double noise);

// GridErrors
// Training errors of each of the 101 grid classifiers on `sample`, in O(m + 101).
std::array<std::uint64_t, kThresholdCount> GridErrors(const LabeledSample& sample);

// GridCell
// The largest j with x > t_j (-1 when x <= 0): h_j(x) = 1 exactly when j <= GridCell(x).
int GridCell(double x);

// ---------------------------------------------------------------------------
// Scenarios.

struct Scenario {
  // Short stable name ("holdout", "threshold-class", ...).
  std::string name;
  // Runs `trials` simulated datasets from the stream of `seed`.
  std::function<std::vector<CoverageRow>(std::int64_t trials, std::uint64_t seed)> run;
};

// Scenarios
// Every registered scenario, in report order. A scenario for a family whose
// core header is not in the tree is not registered.
std::vector<Scenario> Scenarios();

// Individual scenarios (also reachable through Scenarios()).
std::vector<CoverageRow> RunHoldout(std::int64_t trials, std::uint64_t seed);
std::vector<CoverageRow> RunHoldoutUnion(std::int64_t trials, std::uint64_t seed);
std::vector<CoverageRow> RunThresholdClass(std::int64_t trials, std::uint64_t seed);
std::vector<CoverageRow> RunThresholdRealizable(std::int64_t trials, std::uint64_t seed);
std::vector<CoverageRow> RunBoundedLoss(std::int64_t trials, std::uint64_t seed);
std::vector<CoverageRow> RunPacBayes(std::int64_t trials, std::uint64_t seed);
std::vector<CoverageRow> RunRademacher(std::int64_t trials, std::uint64_t seed);
std::vector<CoverageRow> RunCompression(std::int64_t trials, std::uint64_t seed);

// ExactHoldoutScan
// The smallest EXACT coverage of each hold-out family (and of Certify's
// all-applicable minimum) over a grid of true risks p in (0, 1) at sample size
// n, as rows with exact_coverage set (trials = 0). No randomness.
std::vector<CoverageRow> ExactHoldoutScan(std::uint64_t n, double delta, int grid_points);

}  // namespace riskbound::soundness

#endif  // RISKBOUND_TESTS_SOUNDNESS_SIMULATE_H_
