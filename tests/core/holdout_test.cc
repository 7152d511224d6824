#include "service/core/holdout.h"

#include <algorithm>
#include <cmath>
#include <cstdint>

#include "gtest/gtest.h"
#include "tests/testing/fixture.h"

namespace riskbound::core {
namespace {

using ::riskbound::testing::Num;
using ::riskbound::testing::ReadFixture;

// Source: Clopper & Pearson (1934), Hoeffding (1963), Chernoff (1952) /
// Langford (2005) test-set bound; computed independently in Python
// (scipy.stats.beta.isf for Clopper-Pearson, bisection for the kl inverse):
// n = 1000, k = 20, delta = 0.05 gives Clopper-Pearson 0.028930,
// Hoeffding 0.058702, kl 0.032813.
TEST(HoldoutTest, WorkedValues) {
  const SampleCounts counts{20, 1000};
  EXPECT_NEAR(HoldoutExactBinomial(counts, 0.05).risk_upper_bound, 0.028930, 5e-7);
  EXPECT_NEAR(HoldoutHoeffding(counts, 0.05).risk_upper_bound, 0.058702, 5e-7);
  EXPECT_NEAR(HoldoutKlChernoff(counts, 0.05).risk_upper_bound, 0.032813, 5e-7);
}

// Source: scipy fixture holdout.csv (beta.isf / beta.ppf and brentq).
TEST(HoldoutTest, CertificatesMatchScipy) {
  for (const auto& row : ReadFixture("holdout.csv")) {
    const SampleCounts counts{static_cast<std::uint64_t>(Num(row, "errors")),
                              static_cast<std::uint64_t>(Num(row, "samples"))};
    const double delta = Num(row, "delta");
    SCOPED_TRACE(::testing::Message() << counts.error_count << "/" << counts.sample_count << " d=" << delta);
    // Certificates never put the upper bound below the empirical risk (nor the
    // lower above it): for delta > 1/2 the raw Clopper-Pearson limits cross
    // k/n, and the certificate keeps the conservative side.
    const double rate = static_cast<double>(counts.error_count) / static_cast<double>(counts.sample_count);
    const double want_up = std::max(Num(row, "cp_upper"), rate);
    const double want_lo = std::min(Num(row, "cp_lower"), rate);
    const Certificate cp = HoldoutExactBinomial(counts, delta);
    EXPECT_NEAR(cp.risk_upper_bound, want_up, 1e-9 * want_up + 1e-15);
    ASSERT_TRUE(cp.risk_lower_bound.has_value());
    EXPECT_NEAR(*cp.risk_lower_bound, want_lo, 1e-9 * want_lo + 1e-15);
    const Certificate kl = HoldoutKlChernoff(counts, delta);
    EXPECT_NEAR(kl.risk_upper_bound, Num(row, "kl_upper"), 2e-12);
    EXPECT_NEAR(*kl.risk_lower_bound, Num(row, "kl_lower"), 2e-12);
    // Ordering: binomial <= kl <= Hoeffding (the Chernoff tail bounds the
    // binomial tail, Chernoff 1952; Pinsker's inequality for the second).
    const Certificate hoeff = HoldoutHoeffding(counts, delta);
    EXPECT_LE(cp.risk_upper_bound, kl.risk_upper_bound + 1e-12);
    EXPECT_LE(kl.risk_upper_bound, hoeff.risk_upper_bound + 1e-12);
  }
}

// The acceptance value, rule of three (Hanley & Lippman-Hand 1983):
// 0 errors in 300 at delta = 0.05 -> 0.009936.
TEST(HoldoutTest, ZeroErrorsInThreeHundred) {
  const Certificate c = HoldoutExactBinomial({0, 300}, 0.05);
  EXPECT_NEAR(c.risk_upper_bound, 0.009936, 5e-7);
  EXPECT_EQ(c.risk_lower_bound.value(), 0.0);
  EXPECT_EQ(c.empirical_risk, 0.0);
  EXPECT_FALSE(c.vacuous);
  EXPECT_TRUE(c.exact);
}

// Edge cases: k = n, n = 1, delta near 0 and 1, n = 1e15.
TEST(HoldoutTest, EdgeCasesAreFinite) {
  const Certificate all_wrong = HoldoutExactBinomial({50, 50}, 0.05);
  EXPECT_EQ(all_wrong.risk_upper_bound, 1.0);
  EXPECT_TRUE(all_wrong.vacuous);
  // Source: Clopper-Pearson lower limit for k = n is delta^(1/n).
  EXPECT_NEAR(*all_wrong.risk_lower_bound, std::pow(0.05, 1.0 / 50), 1e-12);
  for (double delta : {1e-300, 1e-12, 0.5, 1 - 1e-12}) {
    for (SampleCounts c : {SampleCounts{0, 1}, SampleCounts{1, 1}, SampleCounts{3, 1200},
                           SampleCounts{0, 1'000'000'000'000'000ULL},
                           SampleCounts{10'000'000'000'000ULL, 1'000'000'000'000'000ULL}}) {
      for (const Certificate& cert : {HoldoutExactBinomial(c, delta), HoldoutHoeffding(c, delta),
                                      HoldoutKlChernoff(c, delta)}) {
        EXPECT_TRUE(std::isfinite(cert.risk_upper_bound));
        EXPECT_TRUE(std::isfinite(*cert.risk_lower_bound));
        EXPECT_GE(cert.risk_upper_bound, cert.empirical_risk);
        EXPECT_LE(*cert.risk_lower_bound, cert.empirical_risk);
        EXPECT_LE(cert.risk_upper_bound, 1.0);
        EXPECT_GE(*cert.risk_lower_bound, 0.0);
      }
    }
  }
}

}  // namespace
}  // namespace riskbound::core
