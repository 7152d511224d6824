// The anytime-valid hold-out limits (service/core/anytime.h) against an
// independent scipy implementation, and the properties the gate relies on.
#include "service/core/anytime.h"

#include <cmath>
#include <cstdint>

#include "boost/math/distributions/binomial.hpp"
#include "gtest/gtest.h"
#include "service/core/families.h"
#include "service/core/holdout.h"
#include "tests/testing/fixture.h"

namespace riskbound::core {
namespace {

using riskbound::testing::Num;
using riskbound::testing::ReadFixture;

// Source: scipy fixture anytime.csv (tests/reference/fixtures_anytime.py:
// scipy.special.betaln + betainc, root by scipy.optimize.brentq).
TEST(AnytimeTest, LimitsMatchScipy) {
  int rows = 0;
  for (const auto& row : ReadFixture("anytime.csv")) {
    const auto n = static_cast<std::uint64_t>(Num(row, "samples"));
    const auto k = static_cast<std::uint64_t>(Num(row, "errors"));
    const double delta = Num(row, "delta");
    SCOPED_TRACE(::testing::Message() << k << "/" << n << " delta=" << delta);
    const double up = Num(row, "upper");
    const double lo = Num(row, "lower");
    EXPECT_NEAR(AnytimeUpperLimit(n, k, delta).value, up, 1e-9 * up + 1e-15);
    EXPECT_NEAR(AnytimeLowerLimit(n, k, delta).value, lo, 1e-9 * lo + 1e-15);
    // Wider than the fixed-size Clopper-Pearson limit at the same delta
    // (scipy.stats.beta.isf in the same fixture): anytime validity costs width.
    EXPECT_GE(AnytimeUpperLimit(n, k, delta).value, Num(row, "cp_upper") * (1 - 1e-12));
    ++rows;
  }
  EXPECT_GE(rows, 50);
}

// Source: scipy fixture anytime_martingale.csv (ln M_n(p0) from
// scipy.special.betaln and betainc, the huge log terms subtracted directly).
TEST(AnytimeTest, LogMartingaleMatchesScipy) {
  for (const auto& row : ReadFixture("anytime_martingale.csv")) {
    const auto n = static_cast<std::uint64_t>(Num(row, "samples"));
    const auto k = static_cast<std::uint64_t>(Num(row, "errors"));
    const double c = AnytimePriorConcentration(Num(row, "delta"), 10000);
    const double want = Num(row, "log_m");
    const double mixture = AnytimeLogMixtureUpper(n, k, Num(row, "p0"), Num(row, "delta"));
    const double want_mixture = Num(row, "log_mixture");
    if (std::isinf(mixture)) {
      EXPECT_GT(want_mixture, 700.0);
    } else {
      EXPECT_NEAR(mixture, want_mixture, 1e-9 * std::fabs(want_mixture) + 1e-9);
    }
    const double got = AnytimeLogMartingaleUpper(n, k, Num(row, "p0"), c);
    if (std::isinf(got)) {
      // Far in the tail the posterior density underflows a double: reported
      // as +infinity (rejected), the right side of any threshold.
      EXPECT_GT(want, 700.0) << k << "/" << n << " p0=" << Num(row, "p0");
    } else {
      EXPECT_NEAR(got, want, 1e-9 * std::fabs(want) + 1e-9)
          << k << "/" << n << " p0=" << Num(row, "p0");
    }
  }
}

// Brute force on a grid: ln M_n(p0) increases with p0 above k/n, and every
// p0 above the reported upper limit is rejected (M >= 1/delta), so the limit
// is the supremum of the confidence set, as Ville's inequality needs.
TEST(AnytimeTest, LimitIsTheSupremumOfTheConfidenceSet) {
  for (std::uint64_t n : {3u, 50u, 1000u, 20000u, 300000u}) {
    for (double frac : {0.0, 0.01, 0.05, 0.3}) {
      const auto k = static_cast<std::uint64_t>(frac * static_cast<double>(n));
      for (double delta : {0.05, 0.0125, 1e-6}) {
        SCOPED_TRACE(::testing::Message() << k << "/" << n << " delta=" << delta);
        const double u = AnytimeUpperLimit(n, k, delta).value;
        const double rate = static_cast<double>(k) / static_cast<double>(n);
        double previous = -INFINITY;
        for (int i = 1; i < 200; ++i) {
          const double p0 = rate + (1.0 - rate) * i / 200.0;
          const double log_m = AnytimeLogMixtureUpper(n, k, p0, delta);
          ASSERT_FALSE(std::isnan(log_m)) << p0;
          if (std::isinf(previous) && previous > 0) {
            EXPECT_TRUE(std::isinf(log_m)) << p0;  // underflowed density: rejected
          } else {
            EXPECT_GE(log_m, previous - 1e-9 * std::fabs(previous) - 1e-9) << p0;
          }
          previous = log_m;
          if (p0 > u) {
            EXPECT_GE(log_m, -std::log(delta)) << p0;
          }
          if (p0 < u * (1 - 1e-9)) {
            EXPECT_LT(log_m, -std::log(delta)) << p0;
          }
        }
      }
    }
  }
}

TEST(AnytimeTest, EdgeCounts) {
  EXPECT_EQ(AnytimeUpperLimit(10, 10, 0.05).value, 1.0);
  EXPECT_EQ(AnytimeLowerLimit(10, 0, 0.05).value, 0.0);
  // Huge hold-out sets stay finite and around k/n (one-sided limits at
  // n = 2^50: the width is about sqrt(rate / n) times a few).
  const std::uint64_t n = std::uint64_t{1} << 50;
  const TailLimit u = AnytimeUpperLimit(n, n / 20, 0.05);
  EXPECT_TRUE(std::isfinite(u.value));
  EXPECT_GT(u.value, 0.05);
  EXPECT_LT(u.value, 0.05 + 1e-6);
  const TailLimit l = AnytimeLowerLimit(n, n / 20, 0.05);
  EXPECT_LT(l.value, 0.05);
  EXPECT_GT(l.value, 0.05 - 1e-6);
}

// The shortcut decisions agree with the computed limits.
TEST(AnytimeTest, DecisionsAgreeWithTheLimits) {
  EXPECT_EQ(AnytimeMaxPassingErrors(100, 0.025, 0.05), -1);  // U(0/100) ~ 0.43
  for (std::uint64_t n : {1000u, 12345u, 40000u}) {
    const std::int64_t k_max = AnytimeMaxPassingErrors(n, 0.025, 0.05);
    ASSERT_GE(k_max, 0);
    EXPECT_LE(AnytimeUpperLimit(n, static_cast<std::uint64_t>(k_max), 0.025).value, 0.05);
    EXPECT_GT(AnytimeUpperLimit(n, static_cast<std::uint64_t>(k_max) + 1, 0.025).value, 0.05);
    const std::uint64_t k_min = AnytimeMinFailingErrors(n, 0.025, 0.05);
    ASSERT_LE(k_min, n);
    EXPECT_GT(AnytimeLowerLimit(n, k_min, 0.025).value, 0.05);
    EXPECT_LE(AnytimeLowerLimit(n, k_min - 1, 0.025).value, 0.05);
    for (std::uint64_t k = 0; k <= n / 10; k += std::max<std::uint64_t>(1, n / 500)) {
      EXPECT_EQ(AnytimeUpperAtMost(n, k, 0.025, 0.05), AnytimeUpperLimit(n, k, 0.025).value <= 0.05)
          << k << "/" << n;
    }
    for (std::uint64_t k = 0; k <= n / 5; k += std::max<std::uint64_t>(1, n / 500)) {
      EXPECT_EQ(AnytimeLowerAbove(n, k, 0.025, 0.05), AnytimeLowerLimit(n, k, 0.025).value > 0.05)
          << k << "/" << n;
    }
  }
}

// The plan: at the planned size the pass probability (Boost.Math binomial
// CDF, an outside check of numeric.h's tail) reaches the asked one.
TEST(AnytimeTest, PlanReachesItsPassProbability) {
  absl::StatusOr<std::uint64_t> n = PlanAnytime(0.05, 0.04, 0.025, 0.8, 1000, StopToken::Never());
  ASSERT_TRUE(n.ok()) << n.status();
  const std::int64_t k_max = AnytimeMaxPassingErrors(*n, 0.025, 0.05);
  ASSERT_GE(k_max, 0);
  // Source: boost::math::cdf(binomial_distribution(n, 0.04), k_max).
  const boost::math::binomial_distribution<double> law(static_cast<double>(*n), 0.04);
  EXPECT_GE(boost::math::cdf(law, static_cast<double>(k_max)), 0.8 - 1e-12);
  // The mirror image toward REJECT.
  absl::StatusOr<std::uint64_t> r = PlanAnytime(0.05, 0.06, 0.025, 0.8, 1000, StopToken::Never());
  ASSERT_TRUE(r.ok()) << r.status();
  const std::uint64_t k_min = AnytimeMinFailingErrors(*r, 0.025, 0.05);
  const boost::math::binomial_distribution<double> law_r(static_cast<double>(*r), 0.06);
  EXPECT_GE(boost::math::cdf(boost::math::complement(law_r, static_cast<double>(k_min) - 1)),
            0.8 - 1e-12);
  EXPECT_FALSE(PlanAnytime(0.05, 0.05, 0.025, 0.8, 1000, StopToken::Never()).ok());
}

TEST(AnytimeTest, RegisteredAsAFamily) {
  const FamilySpec* spec = FindFamilyByName("holdout-anytime");
  ASSERT_NE(spec, nullptr);
  EXPECT_EQ(spec->family, Family::kHoldoutAnytime);
  Evidence e;
  e.holdout = SampleCounts{50, 1000};
  ASSERT_TRUE(spec->applies(e));
  const Certificate c = spec->compute(e, 0.05);
  EXPECT_EQ(c.family, Family::kHoldoutAnytime);
  EXPECT_EQ(c.risk_upper_bound, AnytimeUpperLimit(1000, 50, 0.05).value);
  EXPECT_GT(c.risk_upper_bound, HoldoutExactBinomial({50, 1000}, 0.05).risk_upper_bound);
}

}  // namespace
}  // namespace riskbound::core
