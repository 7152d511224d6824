#include "service/core/bounded_loss.h"

#include <algorithm>
#include <cfloat>
#include <cmath>
#include <limits>

#include "service/core/delta_split.h"
#include "service/core/numeric.h"

namespace riskbound::core {
namespace {

constexpr double kInf = std::numeric_limits<double>::infinity();

// A value computed with a few correctly rounded or faithful library calls
// (log, sqrt), raised past their possible error: a few units in the last
// place, relative.
double Raised(double x) { return ProductUp(x, 1.0 + 16.0 * DBL_EPSILON); }

// ln(1/delta), rounded up. REQUIRES: 0 < delta < 1.
double LogInverseUp(double delta) { return Raised(-std::log(delta)); }

// sqrt(x) rounded up.
double SqrtUp(double x) { return std::nextafter(std::sqrt(x), kInf); }

// The loss in [a, b] and its rescaled view z = (x - a) / (b - a) in [0, 1].
// Every limit is computed in the rescaled units and mapped back rounding
// outward (delta_split.h), so a limit is never pulled toward the mean by the
// rounding of large offsets (a range [1e15, 1e15 + 0.125] has one double
// between its ends).
struct Unit {
  double a;           // loss_min
  double b;           // loss_max
  double width_up;    // b - a rounded up
  double width_down;  // b - a rounded down
  double mean;        // the mean loss, in loss units
  double z_up;        // (mean - a) / (b - a) rounded up, in [0, 1]
  double z_down;      // ... rounded down
  double n;           // samples as a double
};

Unit Rescale(const BoundedLossEvidence& e) {
  Unit u;
  u.a = e.loss_min;
  u.b = e.loss_max;
  u.width_up = SumUp(e.loss_max, -e.loss_min);
  u.width_down = SumDown(e.loss_max, -e.loss_min);
  u.mean = std::clamp(e.mean_loss, e.loss_min, e.loss_max);
  u.z_up = std::clamp(QuotientUp(SumUp(u.mean, -u.a), u.width_down), 0.0, 1.0);
  u.z_down = std::clamp(QuotientDown(SumDown(u.mean, -u.a), u.width_up), 0.0, 1.0);
  u.n = static_cast<double>(e.sample_count);
  return u;
}

// mean + (b - a) * slack and mean - (b - a) * slack, rounded outward; slack
// is in rescaled units and already rounded up.
double UpperFromSlack(const Unit& u, double slack) {
  return SumUp(u.mean, ProductUp(u.width_up, slack));
}
double LowerFromSlack(const Unit& u, double slack) {
  return SumDown(u.mean, -ProductUp(u.width_up, slack));
}

// a + (b - a) * z for a rescaled limit z, rounded up (an upper limit) or down
// (a lower limit).
double UpperFromUnit(const Unit& u, double z) { return SumUp(u.a, ProductUp(u.width_up, z)); }
double LowerFromUnit(const Unit& u, double z) {
  return SumDown(u.a, ProductDown(u.width_down, z));
}

// The kl limits of numeric.h moved outward past their floating-point error.
// KlInverseUpper / KlInverseLower bisect on a computed kl(q || p) whose
// absolute error is about 2 eps size, size = q |ln q| + (1 - q) |ln(1 - q)|
// (the differences of logarithms in it are good to eps times the
// logarithms); as kl grows like (p - q)^2 near q, the limit's distance from
// q carries about that divided by 2c, relative (1.7e-8 observed at q =
// 0.001, c = 3.7e-12, where the estimate says 1.9e-6). The distance is
// widened by 4 eps size / c (at most doubled) plus 16 units in the last
// place, and kept inside closed forms that hold whatever the rounding,
// kl(q || p) >= (p - q)^2 / (2p) for p >= q and >= (q - p)^2 / (2q) for
// p <= q (the relative Chernoff forms; Hagerup & Rub 1990, from memory).
double Widening(double gap, double q, double c) {
  const double size = q * std::fabs(std::log(q)) + (1.0 - q) * std::fabs(std::log1p(-q));
  const double relative = std::min(1.0, 4.0 * DBL_EPSILON * size / c);
  return SumUp(ProductUp(gap, relative), ProductUp(16.0 * DBL_EPSILON, gap));
}

double KlUpperOutward(double q, double c) {
  if (q >= 1.0) return 1.0;
  const double bisected = KlInverseUpper(q, c);
  // q = 0: the closed form 1 - exp(-c), a few units in the last place.
  if (q <= 0.0) return std::min(1.0, Raised(bisected));
  const double widened = SumUp(bisected, Widening(SumUp(bisected, -q), q, c));
  // (p - q)^2 = 2 c p: p = q + c + sqrt(c^2 + 2 q c).
  const double closed =
      SumUp(SumUp(q, c), SqrtUp(SumUp(ProductUp(c, c), ProductUp(ProductUp(2.0, q), c))));
  return std::min({1.0, std::nextafter(widened, kInf), closed});
}

double KlLowerOutward(double q, double c) {
  if (q <= 0.0) return 0.0;
  const double bisected = KlInverseLower(q, c);
  // q = 1: the closed form exp(-c).
  if (q >= 1.0) return ProductDown(bisected, 1.0 - 16.0 * DBL_EPSILON);
  const double widened = SumDown(bisected, -Widening(SumUp(q, -bisected), q, c));
  // (q - p)^2 = 2 c q: p = q - sqrt(2 q c).
  const double closed = SumDown(q, -SqrtUp(ProductUp(ProductUp(2.0, q), c)));
  return std::max({0.0, std::nextafter(widened, -kInf), closed});
}

// Clips the limits to [a, b] (the ends exactly, so vacuity is decided without
// rounding) and the penalty (upper - mean) rounded up.
Certificate Build(Family family, const BoundedLossEvidence& e, double delta, const Unit& u,
                  double upper, double lower) {
  const double up = std::isnan(upper) ? u.b : std::clamp(upper, u.mean, u.b);
  const double low = std::isnan(lower) ? u.a : std::clamp(lower, u.a, u.mean);
  Certificate c = MakeCertificateInRange(family, delta, u.mean, up, low, e.loss_min, e.loss_max);
  c.penalty = SumUp(c.risk_upper_bound, -c.empirical_risk);
  c.notes.emplace_back(
      "bounds the expected loss in its own units, on the range [loss_min, loss_max] "
      "fixed in advance; not comparable with 0-1 error rates");
  return c;
}

}  // namespace

Certificate BoundedHoeffding(const BoundedLossEvidence& evidence, double delta) {
  const Unit u = Rescale(evidence);
  // sqrt(ln(1/delta) / (2n)), every step rounded up.
  const double slack = SqrtUp(QuotientUp(LogInverseUp(delta), 2.0 * u.n));
  return Build(Family::kBoundedHoeffding, evidence, delta, u, UpperFromSlack(u, slack),
               LowerFromSlack(u, slack));
}

Certificate BoundedKl(const BoundedLossEvidence& evidence, double delta) {
  const Unit u = Rescale(evidence);
  const double budget = QuotientUp(LogInverseUp(delta), u.n);
  return Build(Family::kBoundedKl, evidence, delta, u,
               UpperFromUnit(u, KlUpperOutward(u.z_up, budget)),
               LowerFromUnit(u, KlLowerOutward(u.z_down, budget)));
}

Certificate BoundedEmpiricalBernstein(const BoundedLossEvidence& evidence, double delta) {
  const Unit u = Rescale(evidence);
  if (evidence.sample_count < 2) {
    Certificate c = Build(Family::kBoundedEmpiricalBernstein, evidence, delta, u, u.b, u.a);
    c.notes.emplace_back(
        "the empirical Bernstein bound needs at least 2 samples; the trivial range "
        "is reported");
    return c;
  }
  // Unbiased variance of the rescaled loss, rounded up and clipped to its
  // largest possible value 1/4 * n/(n-1) (rounded up; validation rejects
  // anything beyond rounding).
  const double largest = QuotientUp(ProductUp(0.25, u.n), u.n - 1.0);
  const double v = std::clamp(
      QuotientUp(QuotientUp(evidence.sample_variance, u.width_down), u.width_down), 0.0,
      largest);
  // ln(2/delta) = ln 2 + ln(1/delta), no overflow; rounded up.
  const double log_term = Raised(SumUp(std::log(2.0), -std::log(delta)));
  // sqrt(2 V ln(2/delta) / n) + 7 ln(2/delta) / (3 (n - 1)), rounded up.
  const double slack =
      SumUp(SqrtUp(QuotientUp(ProductUp(2.0 * v, log_term), u.n)),
            QuotientUp(ProductUp(7.0, log_term), ProductDown(3.0, u.n - 1.0)));
  return Build(Family::kBoundedEmpiricalBernstein, evidence, delta, u,
               UpperFromSlack(u, slack), LowerFromSlack(u, slack));
}

}  // namespace riskbound::core
