#include "service/core/vc.h"

#include <algorithm>
#include <cmath>
#include <numbers>

namespace riskbound::core {
namespace {

// ln Pi(2m) - ln(delta/4): the numerator shared by both VC forms.
double VcNumerator(double h, double m, double delta) {
  return VcLogGrowthBound(h, m) + std::log(4.0) - std::log(delta);
}

}  // namespace

double VcLogGrowthBound(double h, double m) {
  if (h <= 0.0) return 0.0;
  const double trivial = 2.0 * m * std::numbers::ln2;
  // Sauer-Shelah needs 2m >= h; beyond it only the trivial 2^{2m} holds.
  if (h >= 2.0 * m) return trivial;
  return std::min(h * (std::log(2.0 * m / h) + 1.0), trivial);
}

double VcConfidence(double h, double m, double delta) {
  return std::sqrt(VcNumerator(h, m, delta) / m);
}

Certificate VcAdditive(const SampleCounts& counts, std::uint64_t vc_dimension,
                       double delta) {
  return VcAdditiveAtReal(counts, static_cast<double>(vc_dimension), delta);
}

Certificate VcRelative(const SampleCounts& counts, std::uint64_t vc_dimension, double delta) {
  return VcRelativeAtReal(counts, static_cast<double>(vc_dimension), delta);
}

Certificate VcAdditiveAtReal(const SampleCounts& counts, double h, double delta) {
  const double m = static_cast<double>(counts.sample_count);
  const double rate = EmpiricalRate(counts);
  const double slack = VcConfidence(h, m, delta) + 1.0 / m;
  Certificate c = MakeCertificate(Family::kVcAdditive, delta, rate, rate + slack,
                                  rate - slack);
  if (h > 2.0 * m) {
    c.notes.emplace_back("VC dimension exceeds twice the sample size: the growth "
                         "function is bounded only by 2^(2m) and the bound is vacuous");
  }
  return c;
}

Certificate VcRelativeAtReal(const SampleCounts& counts, double h, double delta) {
  const double m = static_cast<double>(counts.sample_count);
  const double rate = EmpiricalRate(counts);
  const double e = 4.0 * VcNumerator(h, m, delta) / m;
  const double upper = rate + (e / 2.0) * (1.0 + std::sqrt(1.0 + 4.0 * rate / e));
  return MakeCertificate(Family::kVcRelative, delta, rate, upper, std::nullopt);
}

}  // namespace riskbound::core
