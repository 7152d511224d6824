#include "service/core/finite_class.h"

#include <cmath>

#include "service/core/numeric.h"

namespace riskbound::core {
namespace {

// (ln|H| + ln(1/delta)) / m.
double Budget(const SampleCounts& counts, double log_hypothesis_count, double delta) {
  return (log_hypothesis_count - std::log(delta)) / static_cast<double>(counts.sample_count);
}

}  // namespace

Certificate OccamHoeffding(const SampleCounts& counts, double log_hypothesis_count,
                           double delta) {
  const double rate = EmpiricalRate(counts);
  const double slack = std::sqrt(Budget(counts, log_hypothesis_count, delta) / 2.0);
  return MakeCertificate(Family::kOccamHoeffding, delta, rate, rate + slack,
                         rate - slack);
}

Certificate OccamKl(const SampleCounts& counts, double log_hypothesis_count,
                    double delta) {
  const double rate = EmpiricalRate(counts);
  const double budget = Budget(counts, log_hypothesis_count, delta);
  return MakeCertificate(Family::kOccamKl, delta, rate, KlInverseUpper(rate, budget),
                         KlInverseLower(rate, budget));
}

}  // namespace riskbound::core
