#include "service/core/paired.h"

#include <algorithm>

#include <cmath>

namespace riskbound::core {
namespace {

// Difference of two limits, kept inside [-1, 1] (it always is in exact
// arithmetic; the clamp only guards rounding).
TailLimit Difference(const TailLimit& plus, const TailLimit& minus) {
  return {std::clamp(plus.value - minus.value, -1.0, 1.0), plus.exact && minus.exact};
}

}  // namespace

double McNemarExactOneSidedPValue(std::uint64_t b, std::uint64_t c) {
  const std::uint64_t discordant = b + c;
  if (discordant == 0 || b >= discordant) return 1.0;
  // The log-space tail (numeric.h): Boost's CDF with its work capped, or the
  // tail summed from b; never below the exact value, bounded cost at any count
  // (Boost's uncapped CDF spends tens of milliseconds near b = c ~ 2^51).
  return std::clamp(std::exp(LogBinomialCdf(discordant, b, 0.5)), 0.0, 1.0);
}

TailLimit PairedDifferenceUpper(const PairedCounts& counts, double delta) {
  const double half = delta / 2.0;
  return Difference(BinomialUpperLimit(counts.sample_count, counts.only_challenger_wrong_count, half),
                    BinomialLowerLimit(counts.sample_count, counts.only_champion_wrong_count, half));
}

TailLimit PairedDifferenceLower(const PairedCounts& counts, double delta) {
  const double half = delta / 2.0;
  return Difference(BinomialLowerLimit(counts.sample_count, counts.only_challenger_wrong_count, half),
                    BinomialUpperLimit(counts.sample_count, counts.only_champion_wrong_count, half));
}

TailLimit UnpairedDifferenceUpper(const SampleCounts& challenger,
                                  const SampleCounts& champion, double delta) {
  const double half = delta / 2.0;
  return Difference(BinomialUpperLimit(challenger.sample_count, challenger.error_count, half),
                    BinomialLowerLimit(champion.sample_count, champion.error_count, half));
}

TailLimit UnpairedDifferenceLower(const SampleCounts& challenger,
                                  const SampleCounts& champion, double delta) {
  const double half = delta / 2.0;
  return Difference(BinomialLowerLimit(challenger.sample_count, challenger.error_count, half),
                    BinomialUpperLimit(champion.sample_count, champion.error_count, half));
}

}  // namespace riskbound::core
