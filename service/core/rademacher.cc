#include "service/core/rademacher.h"

#include <algorithm>
#include <cmath>

#include "absl/strings/str_format.h"

namespace riskbound::core {

Certificate RademacherBound(const RademacherEvidence& evidence, double delta) {
  const double m = static_cast<double>(evidence.sample_count);
  const double rate = EmpiricalRate(evidence);
  const bool sampled = evidence.sigma_draw_count > 0;
  const double main_delta = sampled ? delta / 2.0 : delta;
  double complexity = evidence.empirical_rademacher;
  if (sampled) {
    const double draws = static_cast<double>(evidence.sigma_draw_count);
    const double slack_delta = delta / 2.0;
    complexity = std::max(0.0, complexity + std::sqrt(-2.0 * std::log(slack_delta) / (m * draws)));
  }
  // 3 sqrt(ln(2/delta') / (2m)), ln(2/delta') without forming 2/delta'.
  const double confidence =
      3.0 * std::sqrt((std::log(2.0) - std::log(main_delta)) / (2.0 * m));
  Certificate c = MakeCertificate(Family::kRademacher, delta, rate,
                                  rate + complexity + confidence, std::nullopt);
  if (sampled) {
    c.notes.push_back(absl::StrFormat(
        "Rademacher complexity estimated from %d sigma draws: delta split into %g for the "
        "bound and %g for the McDiarmid slack of the estimate",
        evidence.sigma_draw_count, main_delta, delta / 2.0));
  }
  return c;
}

}  // namespace riskbound::core
