// Property tests over a grid: every family's certificate lies in [0, 1]; it is
// non-increasing in the sample size (at a fixed error rate), non-decreasing in
// the errors, in the capacity, and as delta shrinks; upper >= empirical risk
// >= lower. Brute force over the grid; the properties follow from the
// published forms (Vapnik 1998 Ch. 4; Clopper & Pearson 1934; Hoeffding 1963;
// monotonicity in m as used for sample-size inversion).
#include <cmath>
#include <cstdint>
#include <vector>

#include "gtest/gtest.h"
#include "service/core/families.h"

namespace riskbound::core {
namespace {

constexpr double kSlack = 1e-12;  // bisection tolerance

Evidence Make(std::uint64_t errors, std::uint64_t samples, std::uint64_t h, double log_h) {
  Evidence e;
  e.holdout = SampleCounts{errors, samples};
  TrainingEvidence t;
  t.error_count = errors;
  t.sample_count = samples;
  t.capacity.vc_dimension = h;
  t.capacity.log_hypothesis_count = log_h;
  e.training = t;
  return e;
}

void ExpectSane(const Certificate& c) {
  EXPECT_TRUE(std::isfinite(c.risk_upper_bound));
  EXPECT_GE(c.risk_upper_bound, 0.0);
  EXPECT_LE(c.risk_upper_bound, 1.0);
  EXPECT_GE(c.risk_upper_bound, c.empirical_risk);
  if (c.risk_lower_bound) {
    EXPECT_TRUE(std::isfinite(*c.risk_lower_bound));
    EXPECT_LE(*c.risk_lower_bound, c.empirical_risk);
    EXPECT_GE(*c.risk_lower_bound, 0.0);
  }
  EXPECT_NEAR(c.penalty, c.risk_upper_bound - c.empirical_risk, 1e-15);
}

TEST(BoundPropertiesTest, RangeAndMonotonicity) {
  const std::vector<double> deltas = {0.5, 0.1, 0.05, 1e-3, 1e-9};
  const std::vector<double> rates = {0.0, 0.01, 0.1, 0.5};
  const std::vector<std::uint64_t> sizes = {10, 100, 1000, 10000, 100000, 1000000};
  const std::vector<std::uint64_t> caps = {1, 10, 100, 1000};
  for (const FamilySpec& spec : Families()) {
    // This grid holds hold-out and training counts only; families that need
    // other evidence have their own tests.
    if (!spec.applies(Make(1, 10, 1, 0.0))) continue;
    SCOPED_TRACE(std::string(spec.family_name));
    for (double rate : rates) {
      for (std::uint64_t h : caps) {
        for (double delta : deltas) {
          double prev_m = 2.0;
          for (std::uint64_t m : sizes) {
            const auto k = static_cast<std::uint64_t>(std::llround(rate * static_cast<double>(m)));
            const Certificate c = spec.compute(Make(k, m, h, std::log(static_cast<double>(h) * 10)), delta);
            ExpectSane(c);
            // Non-increasing in m at a fixed rate (rate * m integral on this grid).
            EXPECT_LE(c.risk_upper_bound, prev_m + kSlack) << "m=" << m << " rate=" << rate;
            prev_m = c.risk_upper_bound;
          }
        }
      }
    }
    // Non-decreasing in errors, capacity, and as delta shrinks.
    for (std::uint64_t m : sizes) {
      double prev = -1;
      for (std::uint64_t k = 0; k <= m; k += std::max<std::uint64_t>(1, m / 20)) {
        const double u = spec.compute(Make(k, m, 10, std::log(100.0)), 0.05).risk_upper_bound;
        EXPECT_GE(u, prev - kSlack) << "k=" << k << " m=" << m;
        prev = u;
      }
      prev = -1;
      for (std::uint64_t h : caps) {
        const double u = spec.compute(Make(m / 10, m, h, std::log(static_cast<double>(h) * 10)), 0.05).risk_upper_bound;
        EXPECT_GE(u, prev - kSlack) << "h=" << h << " m=" << m;
        prev = u;
      }
      prev = -1;
      for (double delta : deltas) {  // decreasing delta
        const double u = spec.compute(Make(m / 10, m, 10, std::log(100.0)), delta).risk_upper_bound;
        EXPECT_GE(u, prev - kSlack) << "delta=" << delta << " m=" << m;
        prev = u;
      }
    }
  }
}

}  // namespace
}  // namespace riskbound::core
