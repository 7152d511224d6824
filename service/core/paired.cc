#include "service/core/paired.h"

#include <algorithm>

#include <boost/math/distributions/binomial.hpp>

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
  const boost::math::binomial_distribution<> bin(static_cast<double>(discordant), 0.5);
  return std::clamp(boost::math::cdf(bin, static_cast<double>(b)), 0.0, 1.0);
}

TailLimit PairedDifferenceUpper(const PairedCounts& counts, double delta) {
  const double half = delta / 2.0;
  return Difference(BinomialUpperLimit(counts.samples, counts.only_challenger_wrong, half),
                    BinomialLowerLimit(counts.samples, counts.only_champion_wrong, half));
}

TailLimit PairedDifferenceLower(const PairedCounts& counts, double delta) {
  const double half = delta / 2.0;
  return Difference(BinomialLowerLimit(counts.samples, counts.only_challenger_wrong, half),
                    BinomialUpperLimit(counts.samples, counts.only_champion_wrong, half));
}

TailLimit UnpairedDifferenceUpper(const SampleCounts& challenger,
                                  const SampleCounts& champion, double delta) {
  const double half = delta / 2.0;
  return Difference(BinomialUpperLimit(challenger.samples, challenger.errors, half),
                    BinomialLowerLimit(champion.samples, champion.errors, half));
}

TailLimit UnpairedDifferenceLower(const SampleCounts& challenger,
                                  const SampleCounts& champion, double delta) {
  const double half = delta / 2.0;
  return Difference(BinomialLowerLimit(challenger.samples, challenger.errors, half),
                    BinomialUpperLimit(champion.samples, champion.errors, half));
}

}  // namespace riskbound::core
