#include "service/core/holdout.h"

#include <cmath>

#include "service/core/numeric.h"

namespace riskbound::core {
namespace {

constexpr char kRelaxedNote[] =
    "the binomial tail at the exact limit could not be confirmed in double precision "
    "at these counts; the kl-Chernoff limit (valid, slightly looser) is reported in its "
    "place";

}  // namespace

Certificate HoldoutExactBinomial(const SampleCounts& counts, double delta) {
  const TailLimit upper = BinomialUpperLimit(counts.sample_count, counts.error_count, delta);
  const TailLimit lower = BinomialLowerLimit(counts.sample_count, counts.error_count, delta);
  Certificate c = MakeCertificate(Family::kHoldoutExactBinomial, delta, EmpiricalRate(counts),
                                  upper.value, lower.value);
  c.exact = upper.exact && lower.exact;
  if (!c.exact) c.notes.emplace_back(kRelaxedNote);
  return c;
}

Certificate HoldoutHoeffding(const SampleCounts& counts, double delta) {
  const double rate = EmpiricalRate(counts);
  const double slack =
      std::sqrt(-std::log(delta) / (2.0 * static_cast<double>(counts.sample_count)));
  return MakeCertificate(Family::kHoldoutHoeffding, delta, rate, rate + slack,
                         rate - slack);
}

Certificate HoldoutKlChernoff(const SampleCounts& counts, double delta) {
  const double rate = EmpiricalRate(counts);
  const double budget = -std::log(delta) / static_cast<double>(counts.sample_count);
  return MakeCertificate(Family::kHoldoutKlChernoff, delta, rate,
                         KlInverseUpper(rate, budget), KlInverseLower(rate, budget));
}

}  // namespace riskbound::core
