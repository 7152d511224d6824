// Rademacher-complexity family against a scipy/numpy reference, a brute-force
// Rademacher complexity, and edge cases.
#include "service/core/rademacher.h"

#include <cmath>
#include <cstdint>
#include <vector>

#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "tests/testing/fixture.h"

namespace riskbound::core {
namespace {

using ::riskbound::testing::Num;
using ::riskbound::testing::ReadFixture;
using ::testing::Contains;
using ::testing::HasSubstr;

RademacherEvidence Make(std::uint64_t k, std::uint64_t m, double rhat, std::uint64_t draws) {
  RademacherEvidence e;
  e.error_count = k;
  e.sample_count = m;
  e.empirical_rademacher = rhat;
  e.sigma_draw_count = draws;
  return e;
}

// Source: scipy fixture rademacher.csv (Mohri et al. 2018 Thm 3.5 in closed
// form; McDiarmid slack sqrt(2 ln(1/delta') / (m N)) with delta split in
// halves for sampled complexities, McDiarmid 1989 bounded differences).
TEST(RademacherTest, MatchesScipyFixture) {
  int rows = 0;
  for (const auto& row : ReadFixture("rademacher.csv")) {
    const RademacherEvidence e =
        Make(static_cast<std::uint64_t>(Num(row, "errors")),
             static_cast<std::uint64_t>(Num(row, "samples")), Num(row, "empirical_rademacher"),
             static_cast<std::uint64_t>(Num(row, "sigma_draws")));
    const double delta = Num(row, "delta");
    SCOPED_TRACE(::testing::Message() << e.error_count << "/" << e.sample_count
                                      << " rhat=" << e.empirical_rademacher
                                      << " N=" << e.sigma_draw_count << " d=" << delta);
    const Certificate c = RademacherBound(e, delta);
    const double want = Num(row, "upper");
    EXPECT_NEAR(c.risk_upper_bound, want, 1e-9 * want);
    EXPECT_EQ(c.vacuous, c.risk_upper_bound >= 1.0);
    EXPECT_FALSE(c.risk_lower_bound.has_value());
    if (e.sigma_draw_count > 0) {
      EXPECT_THAT(c.notes, Contains(HasSubstr("McDiarmid")));
      // Sampling costs: never below the exact-expectation bound at the same
      // estimate (slack >= 0 and delta/2 in the main term).
      EXPECT_GE(c.risk_upper_bound, RademacherBound(Make(e.error_count, e.sample_count,
                                                    e.empirical_rademacher, 0),
                                               delta).risk_upper_bound);
    }
    ++rows;
  }
  EXPECT_GE(rows, 500);
}

// Brute force (Mohri et al. 2018, Def. 3.1 with the hypothesis class): the
// 13 threshold classifiers h_t(x) = sign(x - t) on 12 sorted points, Rhat
// computed exactly over all 2^12 sigma vectors. Then the bound equals the
// formula of Thm 3.5 by hand, and Rhat respects Massart's lemma
// sqrt(2 ln |H_S| / m) (Massart 2000).
TEST(RademacherTest, BruteForceThresholdClass) {
  const int m = 12;
  double total = 0;
  for (unsigned mask = 0; mask < (1u << m); ++mask) {
    double best = -1e9;
    for (int t = 0; t <= m; ++t) {  // h(x_i) = -1 for i < t, +1 otherwise
      double s = 0;
      for (int i = 0; i < m; ++i) s += ((mask >> i) & 1 ? 1.0 : -1.0) * (i < t ? -1.0 : 1.0);
      best = std::max(best, s / m);
    }
    total += best;
  }
  const double rhat = total / (1u << m);
  EXPECT_GT(rhat, 0.0);
  EXPECT_LE(rhat, std::sqrt(2 * std::log(13.0) / m));  // Massart
  const Certificate c = RademacherBound(Make(2, m, rhat, 0), 0.05);
  EXPECT_NEAR(c.risk_upper_bound, std::min(1.0, 2.0 / 12 + rhat + 3 * std::sqrt(std::log(40.0) / 24)),
              1e-15);
}

// Edge cases (common practice): m = 1, m = 1e15, Rhat 0 and 1, a negative
// Monte-Carlo estimate, N = 1 and huge N, delta 1e-300 and 1 - 1e-12.
TEST(RademacherTest, EdgeCasesAreFinite) {
  for (double delta : {1e-300, 0.05, 1 - 1e-12}) {
    for (std::uint64_t m : {1ULL, 3ULL, 1'000'000'000'000'000ULL}) {
      for (double rhat : {-1.0, -0.01, 0.0, 0.5, 1.0}) {
        for (std::uint64_t n : {0ULL, 1ULL, 1'000'000'000'000'000'000ULL}) {
          if (n == 0 && rhat < 0) continue;  // rejected by validation
          for (std::uint64_t k : {std::uint64_t{0}, m}) {
            const Certificate c = RademacherBound(Make(k, m, rhat, n), delta);
            EXPECT_TRUE(std::isfinite(c.risk_upper_bound));
            EXPECT_GE(c.risk_upper_bound, c.empirical_risk);
            EXPECT_LE(c.risk_upper_bound, 1.0);
            EXPECT_GE(c.risk_upper_bound, 0.0);
          }
        }
      }
    }
  }
  // m = 1e15, exact Rhat = 0, no errors, delta = 0.05: 3 sqrt(ln 40 / 2e15).
  EXPECT_NEAR(RademacherBound(Make(0, 1'000'000'000'000'000ULL, 0.0, 0), 0.05).risk_upper_bound,
              3 * std::sqrt(std::log(40.0) / 2e15), 1e-22);
}

}  // namespace
}  // namespace riskbound::core
