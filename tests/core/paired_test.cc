#include "service/core/paired.h"

#include <cmath>
#include <cstdint>

#include <boost/math/distributions/binomial.hpp>

#include "gtest/gtest.h"
#include "tests/testing/fixture.h"

namespace riskbound::core {
namespace {

using ::riskbound::testing::Num;
using ::riskbound::testing::ReadFixture;

std::uint64_t U(const ::riskbound::testing::FixtureRow& row, const char* key) {
  return static_cast<std::uint64_t>(std::stoull(row.at(key)));
}

// Source: McNemar (1947), exact conditional form; scipy.stats.binom.cdf(10, 35,
// 0.5): b = 10, c = 25 -> 0.008337.
TEST(McNemarTest, WorkedValue) {
  EXPECT_NEAR(McNemarExactOneSidedPValue(10, 25), 0.008337, 5e-7);
}

// Source: scipy.stats.binomtest(b, b + c, 0.5, alternative='less').pvalue
// (fixture mcnemar.csv; small b + c also cross-checked there against the
// exact sum of binomial coefficients).
TEST(McNemarTest, MatchesScipyBinomtest) {
  const auto rows = ReadFixture("mcnemar.csv");
  ASSERT_GE(rows.size(), 10u);
  for (const auto& row : rows) {
    const std::uint64_t b = U(row, "b");
    const std::uint64_t c = U(row, "c");
    const double want = Num(row, "p_value");
    EXPECT_NEAR(McNemarExactOneSidedPValue(b, c), want, 1e-10 * want + 1e-300)
        << "b=" << b << " c=" << c;
  }
}

// By definition (McNemar 1947, exact conditional test): no discordant pair, no evidence: p = 1.
// With c = 0 every outcome is <= b: p = 1. Source: the formula itself.
TEST(McNemarTest, EdgeCases) {
  EXPECT_EQ(McNemarExactOneSidedPValue(0, 0), 1.0);
  EXPECT_EQ(McNemarExactOneSidedPValue(7, 0), 1.0);
  // b = 0: P(Bin(c, 1/2) = 0) = 2^-c exactly. Source: closed form.
  EXPECT_DOUBLE_EQ(McNemarExactOneSidedPValue(0, 20), std::ldexp(1.0, -20));
}

// Symmetry of Bin(N, 1/2): P(X <= b) + P(X <= c - 1) = 1 for N = b + c.
// Source: the binomial symmetry identity (common practice).
TEST(McNemarTest, SymmetryIdentity) {
  for (std::uint64_t b : {1u, 5u, 40u, 333u}) {
    for (std::uint64_t c : {1u, 9u, 41u, 1000u}) {
      const double lhs = McNemarExactOneSidedPValue(b, c);
      const boost::math::binomial_distribution<> bin(static_cast<double>(b + c), 0.5);
      const double rest = boost::math::cdf(boost::math::complement(bin, static_cast<double>(b)));
      EXPECT_NEAR(lhs + rest, 1.0, 1e-12) << b << " " << c;
    }
  }
}

// Source: Clopper-Pearson limits from scipy.stats.beta.isf / beta.ppf,
// cross-checked in the generator by root finding on scipy.stats.binom.cdf
// (fixture paired_difference.csv).
TEST(PairedDifferenceTest, MatchesScipyClopperPearsonPair) {
  const auto rows = ReadFixture("paired_difference.csv");
  ASSERT_GE(rows.size(), 20u);
  for (const auto& row : rows) {
    PairedCounts p;
    p.sample_count = U(row, "samples");
    p.only_challenger_wrong_count = U(row, "b");
    p.only_champion_wrong_count = U(row, "c");
    const double delta = Num(row, "delta");
    const TailLimit up = PairedDifferenceUpper(p, delta);
    const TailLimit low = PairedDifferenceLower(p, delta);
    EXPECT_NEAR(up.value, Num(row, "upper"), 1e-9) << p.sample_count << " " << p.only_challenger_wrong_count;
    EXPECT_NEAR(low.value, Num(row, "lower"), 1e-9) << p.sample_count << " " << p.only_champion_wrong_count;
    EXPECT_TRUE(up.exact);
    EXPECT_LE(low.value, up.value);
  }
}

// Source: Python Monte-Carlo (numpy multinomial draws, 20000 trials, scipy
// Clopper-Pearson limits): at n = 1000, p_b = .05, p_c = .03 the CP pair's
// mean upper bound is 0.0451 (0.0449 on a re-run with another seed); at the
// expected counts b = 50, c = 30 the bound is close to that mean.
TEST(PairedDifferenceTest, MonteCarloScale) {
  PairedCounts p{0, 30, 50, 1000};
  EXPECT_NEAR(PairedDifferenceUpper(p, 0.05).value, 0.0451, 5e-4);
}

// Source: scipy (fixture unpaired_difference.csv), as above.
TEST(UnpairedDifferenceTest, MatchesScipy) {
  const auto rows = ReadFixture("unpaired_difference.csv");
  ASSERT_GE(rows.size(), 8u);
  for (const auto& row : rows) {
    const SampleCounts ch{U(row, "challenger_errors"), U(row, "challenger_samples")};
    const SampleCounts cp{U(row, "champion_errors"), U(row, "champion_samples")};
    const double delta = Num(row, "delta");
    EXPECT_NEAR(UnpairedDifferenceUpper(ch, cp, delta).value, Num(row, "upper"), 1e-9);
    EXPECT_NEAR(UnpairedDifferenceLower(ch, cp, delta).value, Num(row, "lower"), 1e-9);
  }
}

// The unpaired comparison is weaker: same marginal error counts on the same
// number of examples, but the paired limit only pays for the disagreements.
// 1000 examples, candidate wrong on 30, champion on 40, 25 shared errors:
// b = 5, c = 15. Source: the two constructions (Bonferroni pair of
// Clopper & Pearson 1934 limits).
TEST(UnpairedDifferenceTest, WiderThanPaired) {
  const PairedCounts paired{25, 15, 5, 1000};
  const TailLimit p_up = PairedDifferenceUpper(paired, 0.05);
  const TailLimit u_up = UnpairedDifferenceUpper({30, 1000}, {40, 1000}, 0.05);
  EXPECT_LT(p_up.value, u_up.value);
  EXPECT_GT(PairedDifferenceLower(paired, 0.05).value,
            UnpairedDifferenceLower({30, 1000}, {40, 1000}, 0.05).value);
}

// Brute-force coverage: the exact probability that the upper limit holds,
// summed over the joint multinomial law of (b, c) on n = 60 examples.
// Source: brute-force enumeration; must be >= 1 - delta (Bonferroni).
TEST(PairedDifferenceTest, ExactCoverageByEnumeration) {
  const std::uint64_t n = 60;
  const double delta = 0.1;
  for (auto [pb, pc] : {std::pair{0.05, 0.03}, std::pair{0.1, 0.1}, std::pair{0.02, 0.2}}) {
    const double truth = pb - pc;
    const double pn = 1.0 - pb - pc;
    double covered_up = 0.0, covered_low = 0.0, total = 0.0;
    for (std::uint64_t b = 0; b <= n; ++b) {
      for (std::uint64_t c = 0; b + c <= n; ++c) {
        // Multinomial pmf of (b, c, n - b - c) in log space.
        const double nd = static_cast<double>(n), bd = static_cast<double>(b),
                     cd = static_cast<double>(c);
        const double logp = std::lgamma(nd + 1) - std::lgamma(bd + 1) - std::lgamma(cd + 1) -
                            std::lgamma(nd - bd - cd + 1) + bd * std::log(pb) +
                            cd * std::log(pc) + (nd - bd - cd) * std::log(pn);
        const double w = std::exp(logp);
        total += w;
        const PairedCounts counts{0, c, b, n};
        if (PairedDifferenceUpper(counts, delta).value >= truth) covered_up += w;
        if (PairedDifferenceLower(counts, delta).value <= truth) covered_low += w;
      }
    }
    EXPECT_NEAR(total, 1.0, 1e-9);
    EXPECT_GE(covered_up, 1.0 - delta) << pb << " " << pc;
    EXPECT_GE(covered_low, 1.0 - delta) << pb << " " << pc;
  }
}

}  // namespace
}  // namespace riskbound::core
