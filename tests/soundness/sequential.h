// The re-run workflow of issue 15, simulated: a pipeline labels a batch of
// hold-out samples, re-runs the gate on the grown set, and repeats. For a
// true error just at or above max_risk, a PROMOTE at any run is wrong; for
// one at or below it, a REJECT at any run is. With fixed-size bounds
// (Clopper-Pearson at the test's share of delta) the chance of ever being
// wrong grows with the number of runs; with the anytime-valid bounds
// (service/core/anytime.h) it stays below the share (Ville 1939).
//
// Two independent computations of P(ever wrong):
//   * exact: dynamic programming over the error count, convolving each
//     batch's Bin(batch, p) (Boost.Math pmf) and removing the mass that
//     crosses the look's threshold (brute force, no simulation error);
//   * Monte-Carlo: that many simulated paths (std::mt19937_64, each batch's
//     count by inversion of its Boost.Math binomial CDF).
// The thresholds are the gate's own decisions: the largest error count
// whose upper limit is <= max_risk (numeric.h UpperLimitAtMost for
// Clopper-Pearson, anytime.h AnytimeUpperAtMost), and the smallest whose
// lower limit is > max_risk.
#ifndef RISKBOUND_TESTS_SOUNDNESS_SEQUENTIAL_H_
#define RISKBOUND_TESTS_SOUNDNESS_SEQUENTIAL_H_

#include <cstdint>
#include <string>
#include <vector>

namespace riskbound::soundness {

enum class RerunBound { kFixedClopperPearson, kAnytime };
enum class WrongVerdict { kPromote, kReject };

struct RerunSetup {
  double true_error = 0.05;
  double max_risk = 0.05;
  // The failure probability of the test (the gate's risk-bound share).
  double share = 0.025;
  std::uint64_t batch = 250;
  std::uint64_t runs = 80;
  RerunBound bound = RerunBound::kAnytime;
  WrongVerdict wrong = WrongVerdict::kPromote;
};

struct RerunResult {
  RerunSetup setup;
  // P(the wrong verdict at some run), by dynamic programming.
  double exact = 0.0;
  // Monte-Carlo: paths with the wrong verdict at some run, out of trials.
  std::int64_t trials = 0;
  std::int64_t hits = 0;
  double simulated = 0.0;
  double standard_error = 0.0;
};

// Per run r (n = r * batch): kPromote: the largest k with the upper limit
// <= max_risk (-1: none); kReject: the smallest k with the lower limit >
// max_risk (n + 1: none).
std::vector<std::int64_t> Thresholds(const RerunSetup& s);

// The exact probability, given the thresholds.
double ExactEverWrong(const RerunSetup& s, const std::vector<std::int64_t>& thresholds);

// Exact and (trials > 0) Monte-Carlo.
RerunResult RunRerun(const RerunSetup& s, std::int64_t trials, std::uint64_t seed);

std::string BoundName(RerunBound b);

// The champion comparison under re-runs: both models scored on the growing
// shared hold-out set; each sample is "only the candidate wrong" (B) with
// probability only_challenger_rate, "only the champion wrong" (C) with
// only_champion_rate, else neither. The true difference is their
// difference; when it exceeds max_regression, a comparison that passes
// (difference upper bound DU <= max_regression) at any run is wrong. DU is
// the gate's pair: upper limit on B/n minus lower limit on C/n, each at half
// of `share` (the gate's difference share, delta/4). Monte-Carlo only (each
// sample drawn with one uniform); limits computed once per (run, count).
struct PairedRerunSetup {
  double only_challenger_rate = 0.0105;
  double only_champion_rate = 0.01;
  double max_regression = 0.0;
  double share = 0.0125;
  std::uint64_t batch = 250;
  std::uint64_t runs = 80;
  RerunBound bound = RerunBound::kAnytime;
};

struct PairedRerunResult {
  PairedRerunSetup setup;
  std::int64_t trials = 0;
  std::int64_t hits = 0;
  double simulated = 0.0;
  double standard_error = 0.0;
};

PairedRerunResult RunPairedRerun(const PairedRerunSetup& s, std::int64_t trials,
                                 std::uint64_t seed);

}  // namespace riskbound::soundness

#endif  // RISKBOUND_TESTS_SOUNDNESS_SEQUENTIAL_H_
