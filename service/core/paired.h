// Champion versus challenger: the statistics that compare two classifiers'
// error rates on hold-out data.
//
// Two settings:
//  * Paired: both models were scored on the SAME n hold-out examples, drawn
//    after both were fixed. Per example, b counts "only the challenger is
//    wrong" and c counts "only the champion is wrong"; with p_b, p_c their
//    probabilities, Delta = R(challenger) - R(champion) = p_b - p_c.
//  * Unpaired: each model was scored on its own hold-out set. The comparison
//    then rests on two separate binomial limits and is weaker (wider) than the
//    paired one, because the examples both models get right or wrong together
//    cannot cancel out.
//
// Every function here is a pure function of its arguments: thread-safe, no
// global state. Callers validate counts first (gate.h does).
#ifndef RISKBOUND_SERVICE_CORE_PAIRED_H_
#define RISKBOUND_SERVICE_CORE_PAIRED_H_

#include <cstdint>

#include "service/core/evidence.h"
#include "service/core/numeric.h"

namespace riskbound::core {

// Disagreement counts of two classifiers scored on the same hold-out set.
// API field paths: champion.paired.both_wrong_count,
// champion.paired.only_champion_wrong_count,
// champion.paired.only_challenger_wrong_count, champion.paired.sample_count.
struct PairedCounts {
  // Examples both models get wrong.
  std::uint64_t both_wrong_count = 0;
  // c: the champion is wrong, the challenger right.
  std::uint64_t only_champion_wrong_count = 0;
  // b: the challenger is wrong, the champion right.
  std::uint64_t only_challenger_wrong_count = 0;
  // n: every hold-out example, including those both models get right.
  std::uint64_t sample_count = 0;
};

// McNemarExactOneSidedPValue
// Returns the exact conditional one-sided McNemar p-value
//   P(Bin(b + c, 1/2) <= b),
// and 1 when b + c = 0 (no discordant example: no evidence either way).
// Small values are evidence that the challenger is better (H0: p_b >= p_c
// against H1: p_b < p_c). Computed with Boost.Math's exact binomial CDF
// (regularized incomplete beta, its work capped) or the exact tail summed in
// log space (numeric.h LogBinomialCdf), never a normal approximation; where
// neither settles it (counts far above 2^32), an upper bound on the p-value.
// Source: McNemar (1947), exact conditional binomial version.
// REQUIRES: b + c <= 2^53 (exact in a double). Thread-safe.
double McNemarExactOneSidedPValue(std::uint64_t b, std::uint64_t c);

// PairedDifferenceUpper
// Returns an upper confidence limit on Delta = p_b - p_c that holds with
// probability >= 1 - delta: the Bonferroni Clopper-Pearson pair
//   Binbar(n, b, delta/2) - Binlow(n, c, delta/2).
// Each one-sided limit fails with probability <= delta/2, so both hold
// together with probability >= 1 - delta (union bound). b and c are each
// Bin(n, p_b) and Bin(n, p_c) marginally, whatever their dependence, which is
// all this construction needs. value is in [-1, 1]; exact is false when a
// conservative relaxation stood in for a Clopper-Pearson limit (still valid).
// Source: Clopper & Pearson (1934) with a Bonferroni union bound (the
// construction is conservative: its coverage exceeds the nominal level).
// REQUIRES: counts.sample_count >= 1, b <= n, c <= n, 0 < delta < 1. Thread-safe.
TailLimit PairedDifferenceUpper(const PairedCounts& counts, double delta);

// PairedDifferenceLower
// Returns the mirror-image lower limit Binlow(n, b, delta/2) -
// Binbar(n, c, delta/2), holding with probability >= 1 - delta.
// Source and REQUIRES: as PairedDifferenceUpper.
TailLimit PairedDifferenceLower(const PairedCounts& counts, double delta);

// UnpairedDifferenceUpper
// Champion and challenger scored on different, independent hold-out sets.
// Returns an upper limit on Delta = R(challenger) - R(champion):
//   Binbar(n1, k1, delta/2) - Binlow(n2, k2, delta/2),
// with (k1, n1) the challenger's and (k2, n2) the champion's counts; holds with
// probability >= 1 - delta by the same union bound.
// NOTE: weaker than the paired limit on the same number of examples: each
// model's whole error rate carries sampling noise, where the paired limit only
// pays for the disagreements. Prefer paired evidence.
// Source: Clopper & Pearson (1934) with a Bonferroni union bound, on two
// separate samples.
// REQUIRES: both samples >= 1, errors <= samples, 0 < delta < 1. Thread-safe.
TailLimit UnpairedDifferenceUpper(const SampleCounts& challenger,
                                  const SampleCounts& champion, double delta);

// UnpairedDifferenceLower
// Returns Binlow(n1, k1, delta/2) - Binbar(n2, k2, delta/2), a lower limit on
// Delta holding with probability >= 1 - delta.
// Source and REQUIRES: as UnpairedDifferenceUpper.
TailLimit UnpairedDifferenceLower(const SampleCounts& challenger,
                                  const SampleCounts& champion, double delta);

}  // namespace riskbound::core

#endif  // RISKBOUND_SERVICE_CORE_PAIRED_H_
