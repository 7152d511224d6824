#include "service/core/evidence.h"

#include <algorithm>
#include <cmath>

namespace riskbound::core {

Certificate MakeCertificate(Family family, double delta, double empirical_risk,
                            double upper_bound,
                            std::optional<double> lower_bound) {
  Certificate c;
  c.family = family;
  c.failure_probability = delta;
  c.empirical_risk = std::clamp(empirical_risk, 0.0, 1.0);
  double upper = std::isnan(upper_bound) ? 1.0 : std::clamp(upper_bound, 0.0, 1.0);
  c.risk_upper_bound = std::max(upper, c.empirical_risk);
  if (lower_bound.has_value()) {
    double lower = std::isnan(*lower_bound) ? 0.0 : std::clamp(*lower_bound, 0.0, 1.0);
    c.risk_lower_bound = std::min(lower, c.empirical_risk);
  }
  c.penalty = c.risk_upper_bound - c.empirical_risk;
  c.vacuous = c.risk_upper_bound >= 1.0;
  return c;
}

Certificate MakeCertificateInRange(Family family, double delta, double empirical,
                                   double upper_bound,
                                   std::optional<double> lower_bound,
                                   double range_min, double range_max) {
  Certificate c;
  c.family = family;
  c.failure_probability = delta;
  c.loss_range = LossRange{range_min, range_max};
  c.empirical_risk = std::isnan(empirical) ? range_max : std::clamp(empirical, range_min, range_max);
  const double upper =
      std::isnan(upper_bound) ? range_max : std::clamp(upper_bound, range_min, range_max);
  c.risk_upper_bound = std::max(upper, c.empirical_risk);
  if (lower_bound.has_value()) {
    const double lower =
        std::isnan(*lower_bound) ? range_min : std::clamp(*lower_bound, range_min, range_max);
    c.risk_lower_bound = std::min(lower, c.empirical_risk);
  }
  c.penalty = c.risk_upper_bound - c.empirical_risk;
  c.vacuous = c.risk_upper_bound >= range_max;
  return c;
}

}  // namespace riskbound::core
