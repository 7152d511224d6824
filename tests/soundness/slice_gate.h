// The slice gate (issue 16), simulated: G slices of a hold-out set, each of
// a fixed size with its own true error rate and limit, the gate's per-slice
// outcome (CLEARS: upper limit <= limit; EXCEEDS: lower limit > limit) at
// each slice's share of the slices' part of delta, and how often the slices
// make the gate wrong:
//   * wrong PROMOTE: every slice CLEARS although some slice's true rate is
//     above its limit. Only a failed upper limit of such a slice can do it,
//     so the promise is the sum of those slices' upper-limit shares
//     (Bonferroni 1936), or 1 - prod(1 - share/2) over them (Sidak 1967,
//     the slices' counts being independent here);
//   * wrong REJECT on a slice: some slice EXCEEDS although every slice's
//     true rate is at or below its limit: only a failed lower limit can do
//     it; the promise is the same over every slice's lower-limit share.
// Both promises are at most the slices' part of delta (delta / 2 without a
// champion), the share of the slices' statements; the overall risk bounds
// have their own shares (gate.h) and are not part of these figures (the
// simulated policy never lets the overall risk decide).
//
// A slice whose true rate equals its limit counts as above it for PROMOTE
// (the probability of a PROMOTE is continuous in the rate, so the figure is
// the limit of wrong PROMOTEs as the rate comes down to the limit) and as at
// or below it for REJECT: the worst case of both.
//
// Two computations: exact (the slices' counts are independent binomials, so
// P(every slice clears) = prod_j P(K_j <= kmax_j) and P(some slice exceeds)
// = 1 - prod_j P(K_j < kmin_j), Boost.Math binomial CDF), and Monte-Carlo
// (each slice's count by inversion of its Boost.Math binomial CDF, one
// uniform of std::mt19937_64 each). The thresholds kmax_j, kmin_j are the
// gate's own decisions: the core's SliceShares and HoldoutExactBinomial
// (HoldoutAnytime in sequential mode) at half of each share, as DecideGate
// computes them; slice_gate_test.cc checks them against DecideGate.
#ifndef RISKBOUND_TESTS_SOUNDNESS_SLICE_GATE_H_
#define RISKBOUND_TESTS_SOUNDNESS_SLICE_GATE_H_

#include <cstdint>
#include <string>
#include <vector>

#include "service/core/slices.h"

namespace riskbound::soundness {

struct SliceGateSetup {
  std::vector<std::uint64_t> sizes;
  std::vector<double> limits;
  std::vector<double> true_rates;
  core::SliceShareRule rule = core::SliceShareRule::kBonferroni;
  // The policy's failure_probability; no champion, so the slices' part is
  // delta / 2 (rounded down, delta_split.h).
  double failure_probability = 0.05;
};

struct SliceGateResult {
  SliceGateSetup setup;
  double slices_part = 0.0;
  std::vector<double> shares;
  // Per slice: the most errors that CLEAR (-1: none), the fewest that EXCEED
  // (sample_count + 1: none).
  std::vector<std::int64_t> k_max_clears;
  std::vector<std::int64_t> k_min_exceeds;
  // Some slice at or above its limit: a PROMOTE is wrong (the PROMOTE rows);
  // every slice at or below: a REJECT is wrong (the REJECT rows).
  bool promote_is_wrong = false;
  bool reject_is_wrong = false;
  // The promises (see the top of the file): over the slices at or above
  // their limit for PROMOTE, over every slice for REJECT.
  double promote_promise = 0.0;
  double reject_promise = 0.0;
  // Exact P(every slice clears), P(some slice exceeds).
  double exact_promote = 0.0;
  double exact_reject = 0.0;
  // Monte-Carlo.
  std::int64_t trials = 0;
  std::int64_t promote_hits = 0;
  std::int64_t reject_hits = 0;
  double simulated_promote = 0.0;
  double simulated_reject = 0.0;
};

// The slices of a setup as the gate sees them ("slice-0", ...; counts unset).
std::vector<core::SliceEvidence> SetupSlices(const SliceGateSetup& s);

// Thresholds, promises and exact probabilities; with trials > 0 also the
// Monte-Carlo estimate from the stream of `seed`.
SliceGateResult RunSliceGate(const SliceGateSetup& s, std::int64_t trials, std::uint64_t seed);

// The promise check shared by the fast test and the report: the exact
// probability of each wrong verdict at most its promise, and the simulated
// one at most the promise plus 3 binomial standard errors (sqrt(promise (1 -
// promise) / T)) plus 1/T. Returns one line per failure (empty: pass).
std::vector<std::string> CheckSliceGate(const SliceGateResult& r);

// The re-run workflow with slices (sequential mode, anytime-valid slice
// bounds): every slice grows by sizes[j] / runs samples before each of
// `runs` re-runs. Exact (brute force, sequential.h ExactEverWrong per slice,
// the slices independent): P(some slice EXCEEDS at some run) with every
// slice at its limit, and P(a slice above its limit CLEARS at some run), an
// upper bound on a wrong PROMOTE at some run.
struct SequentialSliceResult {
  double reject_ever = 0.0;
  double reject_promise = 0.0;
  double promote_ever_bound = 0.0;
  double promote_promise = 0.0;
  // The same with fixed-size (Clopper-Pearson) slice bounds, for contrast.
  double fixed_reject_ever = 0.0;
  double fixed_promote_ever_bound = 0.0;
};
SequentialSliceResult RunSequentialSlices(const SliceGateSetup& s, std::uint64_t runs);

}  // namespace riskbound::soundness

#endif  // RISKBOUND_TESTS_SOUNDNESS_SLICE_GATE_H_
