#include <cmath>
#include <cstdint>

#include "gtest/gtest.h"
#include "service/core/finite_class.h"
#include "service/core/vc.h"
#include "tests/testing/fixture.h"

namespace riskbound::core {
namespace {

using ::riskbound::testing::Num;
using ::riskbound::testing::ReadFixture;

// Source: Vapnik (1998) Ch. 4 / Burges (1998) eq. (3), evaluated
// independently in Python (/usr/bin/python3): R_emp = 0.05, h = 100,
// m = 10000, eta = 0.05 gives VC confidence 0.251836, bound 0.301836, and
// 0.301936 with the conservative +1/m we implement (Vapnik 1998 Thm 4.1's
// (eps - 1/m)^2, theorem number from memory).
TEST(VcAdditiveTest, WorkedValue) {
  EXPECT_NEAR(VcConfidence(100, 10000, 0.05), 0.251836, 5e-7);
  const Certificate c = VcAdditive({500, 10000}, 100, 0.05);
  EXPECT_NEAR(c.risk_upper_bound, 0.301936, 5e-7);
  EXPECT_EQ(*c.risk_lower_bound, 0.0);  // 0.05 - 0.251936 clipped at 0
}

// Source: Burges (1998), discussion of his Fig. 1: for eta = 0.05 and
// l = 10000 the VC confidence exceeds 1 once h/l > 0.37. Crossover solved with
// scipy brentq (fixture vc_crossover.csv): h/l = 0.373104, first h = 3732.
TEST(VcAdditiveTest, BurgesCrossover) {
  const auto row = ReadFixture("vc_crossover.csv").at(0);
  const double l = Num(row, "samples");
  const double delta = Num(row, "delta");
  const auto first = static_cast<std::uint64_t>(Num(row, "first_vacuous_h"));
  // Burges (1998), discussion of his Fig. 1, quotes h/l > 0.37; 0.373104 is the
  // root of x(ln(2/x) + 1) + ln(4/eta)/l = 1 (scipy.optimize.brentq).
  EXPECT_NEAR(Num(row, "crossover_ratio"), 0.373104, 5e-7);
  EXPECT_GT(VcConfidence(static_cast<double>(first), l, delta), 1.0);
  EXPECT_LT(VcConfidence(static_cast<double>(first - 1), l, delta), 1.0);
  // At h/l = 0.37 the confidence is 0.9974 (independent Python evaluation).
  EXPECT_NEAR(VcConfidence(3700, l, delta), 0.9974, 5e-5);
  EXPECT_TRUE(VcAdditive({0, 10000}, first, delta).vacuous);
}

// Source: Vapnik (1998) Ch. 4, relative uniform convergence (Theorem 4.2,
// from memory; proof corrected by Anthony & Shawe-Taylor 1993), solved for R
// and evaluated independently in Python: relative bound 0.273320 at
// (0.01, h=100, m=1e4); 0.019376 at (0.01, h=10, m=1e5); E = 0.253686 at R_emp = 0.
TEST(VcRelativeTest, WorkedValues) {
  EXPECT_NEAR(VcRelative({100, 10000}, 100, 0.05).risk_upper_bound, 0.273320, 5e-7);
  EXPECT_NEAR(VcRelative({1000, 100000}, 10, 0.05).risk_upper_bound, 0.019376, 5e-7);
  EXPECT_NEAR(VcRelative({0, 10000}, 100, 0.05).risk_upper_bound, 0.253686, 5e-7);
  EXPECT_FALSE(VcRelative({0, 10000}, 100, 0.05).risk_lower_bound.has_value());
  // Additive counterparts quoted beside them (without the +1/m): 0.261836 and 0.043677.
  EXPECT_NEAR(VcAdditive({100, 10000}, 100, 0.05).risk_upper_bound, 0.261836 + 1e-4, 5e-7);
  EXPECT_NEAR(VcAdditive({1000, 100000}, 10, 0.05).risk_upper_bound, 0.043677 + 1e-5, 5e-7);
}

// h >= m and h > 2m: finite and vacuous, never NaN.
TEST(VcTest, CapacityAtOrAboveSampleSize) {
  for (std::uint64_t h : {1000ULL, 2000ULL, 2001ULL, 1ULL << 62}) {
    const Certificate a = VcAdditive({10, 1000}, h, 0.05);
    const Certificate r = VcRelative({10, 1000}, h, 0.05);
    EXPECT_EQ(a.risk_upper_bound, 1.0) << h;
    EXPECT_EQ(r.risk_upper_bound, 1.0) << h;
    EXPECT_TRUE(a.vacuous);
  }
  // h = 0 (a class of one function): only the ln(4/delta) term remains.
  EXPECT_NEAR(VcConfidence(0, 10000, 0.05), std::sqrt(std::log(4 / 0.05) / 10000), 1e-15);
}

// Source: Hoeffding (1963) plus a union bound (Shalev-Shwartz & Ben-David
// 2014, Cor. 4.6) and Langford (2005) Occam's razor bound, kl form (Thm 4.1,
// number from memory), evaluated independently in Python: |H| = 1e6,
// m = 5000, R_emp = 0.05, delta = 0.05: Hoeffding 0.091002, kl 0.069910.
TEST(OccamTest, WorkedValues) {
  const SampleCounts counts{250, 5000};
  EXPECT_NEAR(OccamHoeffding(counts, std::log(1e6), 0.05).risk_upper_bound, 0.091002, 5e-7);
  EXPECT_NEAR(OccamKl(counts, std::log(1e6), 0.05).risk_upper_bound, 0.069910, 5e-7);
}

// Source: scipy brentq kl inverse at the Occam budget (fixture occam_kl.csv).
TEST(OccamTest, KlFormMatchesScipy) {
  for (const auto& row : ReadFixture("occam_kl.csv")) {
    const SampleCounts counts{static_cast<std::uint64_t>(Num(row, "errors")),
                              static_cast<std::uint64_t>(Num(row, "samples"))};
    const Certificate c = OccamKl(counts, Num(row, "log_hypothesis_count"), Num(row, "delta"));
    EXPECT_NEAR(c.risk_upper_bound, Num(row, "kl_upper"), 2e-12);
    EXPECT_NEAR(*c.risk_lower_bound, Num(row, "kl_lower"), 2e-12);
  }
}

// Source: Blumer, Ehrenfeucht, Haussler & Warmuth (1987); Shalev-Shwartz &
// Ben-David (2014) Cor. 2.3: with zero training errors the kl form is at most
// the realizable (ln|H| + ln(1/delta))/m = 0.003362 (hand/Python evaluation).
TEST(OccamTest, RealizableCaseTighterThanBlumer) {
  const double kl = OccamKl({0, 5000}, std::log(1e6), 0.05).risk_upper_bound;
  EXPECT_LE(kl, 0.003362);
  // Exact form 1 - (delta/|H|)^(1/m) = 0.003357 equals kl^{-1}(0, c) = 1 - e^{-c}.
  EXPECT_NEAR(kl, 0.003357, 5e-7);
}

}  // namespace
}  // namespace riskbound::core
