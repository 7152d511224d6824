#include "service/core/bounded_loss.h"

#include <algorithm>
#include <cmath>

#include "service/core/numeric.h"

namespace riskbound::core {
namespace {

// The loss rescaled to [0, 1].
struct Unit {
  double a;      // loss_min
  double width;  // loss_max - loss_min > 0
  double mean;   // rescaled mean in [0, 1]
  double n;      // samples as a double
};

Unit Rescale(const BoundedLossEvidence& e) {
  Unit u;
  u.a = e.loss_min;
  u.width = e.loss_max - e.loss_min;
  u.mean = std::clamp((e.mean_loss - e.loss_min) / u.width, 0.0, 1.0);
  u.n = static_cast<double>(e.sample_count);
  return u;
}

// Maps a rescaled limit back to loss units; the ends map exactly to the ends
// (a + (b - a) need not round to b), so vacuity is decided without rounding.
double Back(const Unit& u, double z, double b) {
  if (std::isnan(z)) return z;  // MakeCertificateInRange maps it to the trivial end
  if (z <= 0.0) return u.a;
  if (z >= 1.0) return b;
  return std::min(u.a + u.width * z, b);
}

Certificate Build(Family family, const BoundedLossEvidence& e, double delta, const Unit& u,
                  double upper_z, double lower_z) {
  Certificate c = MakeCertificateInRange(family, delta, e.mean_loss, Back(u, upper_z, e.loss_max),
                                         Back(u, lower_z, e.loss_max), e.loss_min, e.loss_max);
  c.notes.emplace_back(
      "bounds the expected loss in its own units, on the range [loss_min, loss_max] "
      "fixed in advance; not comparable with 0-1 error rates");
  return c;
}

}  // namespace

Certificate BoundedHoeffding(const BoundedLossEvidence& evidence, double delta) {
  const Unit u = Rescale(evidence);
  const double slack = std::sqrt(-std::log(delta) / (2.0 * u.n));
  return Build(Family::kBoundedHoeffding, evidence, delta, u, u.mean + slack,
               u.mean - slack);
}

Certificate BoundedKl(const BoundedLossEvidence& evidence, double delta) {
  const Unit u = Rescale(evidence);
  const double budget = -std::log(delta) / u.n;
  return Build(Family::kBoundedKl, evidence, delta, u, KlInverseUpper(u.mean, budget),
               KlInverseLower(u.mean, budget));
}

Certificate BoundedEmpiricalBernstein(const BoundedLossEvidence& evidence, double delta) {
  const Unit u = Rescale(evidence);
  if (evidence.sample_count < 2) {
    Certificate c = Build(Family::kBoundedEmpiricalBernstein, evidence, delta, u, 1.0, 0.0);
    c.notes.emplace_back(
        "the empirical Bernstein bound needs at least 2 samples; the trivial range "
        "is reported");
    return c;
  }
  // Unbiased variance of the rescaled loss, clipped to its largest possible
  // value 1/4 * n/(n-1) (validation rejects anything beyond rounding).
  const double v = std::clamp(evidence.sample_variance / u.width / u.width, 0.0,
                              0.25 * u.n / (u.n - 1.0));
  const double log_term = std::log(2.0) - std::log(delta);  // ln(2/delta), no overflow
  const double slack =
      std::sqrt(2.0 * v * log_term / u.n) + 7.0 * log_term / (3.0 * (u.n - 1.0));
  return Build(Family::kBoundedEmpiricalBernstein, evidence, delta, u, u.mean + slack,
               u.mean - slack);
}

}  // namespace riskbound::core
