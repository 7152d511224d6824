#include "service/core/numeric.h"

#include <cmath>
#include <cstdint>
#include <limits>

#include <boost/math/distributions/binomial.hpp>

#include "absl/strings/str_cat.h"
#include "gtest/gtest.h"
#include "tests/testing/fixture.h"
#include "tests/testing/status_matchers.h"

namespace riskbound::core {
namespace {

using ::riskbound::testing::Num;
using ::riskbound::testing::ReadFixture;
using ::riskbound::testing::StatusIs;

// Source: scipy.stats.beta.isf / beta.ppf (fixture holdout.csv, written by
// tests/reference/fixtures_holdout.py).
TEST(BinomialLimitTest, MatchesScipyBetaQuantiles) {
  const auto rows = ReadFixture("holdout.csv");
  for (const auto& row : rows) {
    const auto n = static_cast<std::uint64_t>(Num(row, "samples"));
    const auto k = static_cast<std::uint64_t>(Num(row, "errors"));
    const double delta = Num(row, "delta");
    SCOPED_TRACE(::testing::Message() << "n=" << n << " k=" << k << " delta=" << delta);
    const TailLimit up = BinomialUpperLimit(n, k, delta);
    const TailLimit lo = BinomialLowerLimit(n, k, delta);
    EXPECT_TRUE(up.exact);
    EXPECT_NEAR(up.value, Num(row, "cp_upper"), 1e-9 * Num(row, "cp_upper") + 1e-15);
    EXPECT_NEAR(lo.value, Num(row, "cp_lower"), 1e-9 * Num(row, "cp_lower") + 1e-15);
  }
}

// Source: scipy.optimize.brentq on kl(q||p) - c (fixture holdout.csv).
TEST(KlInverseTest, MatchesScipyRootFind) {
  const auto rows = ReadFixture("holdout.csv");
  for (const auto& row : rows) {
    const double n = Num(row, "samples");
    const double q = Num(row, "errors") / n;
    const double c = std::log(1.0 / Num(row, "delta")) / n;
    SCOPED_TRACE(::testing::Message() << "q=" << q << " c=" << c);
    const double up = KlInverseUpper(q, c);
    const double lo = KlInverseLower(q, c);
    EXPECT_NEAR(up, Num(row, "kl_upper"), 2e-12);
    EXPECT_NEAR(lo, Num(row, "kl_lower"), 2e-12);
    // Conservative ends of the bisection.
    EXPECT_GE(up, Num(row, "kl_upper") - 1e-13);
    EXPECT_LE(lo, Num(row, "kl_lower") + 1e-13);
  }
}

// Source: independent Python bisection of kl(q||p) = c (/usr/bin/python3,
// 200 halvings): q = 0.1, c = 0.05 gives p = 0.2200786011.
TEST(KlInverseTest, IndependentWorkedValue) {
  EXPECT_NEAR(KlInverseUpper(0.1, 0.05), 0.2200786011, 1e-10);
  EXPECT_GE(BernoulliKl(0.1, KlInverseUpper(0.1, 0.05)), 0.05);
}

// Source: Boost.Math binomial_distribution::find_upper_bound_on_p, which our
// k = 0 closed form 1 - delta^(1/n) bypasses.
TEST(BinomialLimitTest, ZeroErrorClosedFormMatchesBoost) {
  for (std::uint64_t n : {1ULL, 7ULL, 300ULL, 100000ULL, 1000000000ULL}) {
    for (double delta : {0.5, 0.05, 1e-6, 1e-12}) {
      const double boost_value =
          boost::math::binomial_distribution<>::find_upper_bound_on_p(
              static_cast<double>(n), 0.0, delta);
      EXPECT_NEAR(BinomialUpperLimit(n, 0, delta).value, boost_value,
                  1e-12 * boost_value + 1e-300)
          << "n=" << n << " delta=" << delta;
    }
  }
}

// Source: Hanley & Lippman-Hand (1983), rule of three; exact values
// 1 - 0.05^(1/n), recomputed with scipy.stats.beta.isf(0.05, 1, n)
// (n = 100: 0.029513; n = 300: 0.009936; n = 1000: 0.002991).
TEST(BinomialLimitTest, RuleOfThree) {
  EXPECT_NEAR(BinomialUpperLimit(100, 0, 0.05).value, 0.029513, 5e-7);
  EXPECT_NEAR(BinomialUpperLimit(300, 0, 0.05).value, 0.009936, 5e-7);
  EXPECT_NEAR(BinomialUpperLimit(1000, 0, 0.05).value, 0.002991, 5e-7);
  for (std::uint64_t n : {30ULL, 300ULL, 3000ULL}) {
    const double exact = BinomialUpperLimit(n, 0, 0.05).value;
    EXPECT_LE(exact, 3.0 / static_cast<double>(n));               // "about 3/n"
    EXPECT_LE(exact, -std::log(0.05) / static_cast<double>(n));  // 1 - d^(1/n) <= ln(1/d)/n
  }
}

// Source: Boost.Math's binomial CDF (default policy, an outside evaluation of
// the defining equation P(Bin(n, u) <= k) = delta) and the kl-Chernoff limit,
// which the exact limit never exceeds. At these counts Boost's own inversion
// gives up; the bracketed log-space search must still land on the exact
// limit, not on the looser relaxation. scipy (which wraps the same Boost
// inversion) gives up here too, so it cannot serve as the reference.
TEST(BinomialLimitTest, HugeSampleSolvesTheDefiningEquation) {
  struct Row {
    std::uint64_t n, k;
    double delta;
  };
  for (const Row& r : {Row{1'000'000'000'000'000ULL, 10'000'000'000'000ULL, 0.05},
                       Row{1ULL << 53, 1ULL << 50, 0.05},
                       Row{100'000'000'000'000ULL, 1'000'000'000'000ULL, 1e-10},
                       Row{9'000'000'000'000'000ULL, 9'000'000'000'000ULL, 1e-300},
                       Row{1'000'000'000'000ULL, 100'000'000'000ULL, 0.999}}) {
    SCOPED_TRACE(absl::StrCat("n=", r.n, " k=", r.k, " delta=", r.delta));
    const double n = static_cast<double>(r.n);
    const double k = static_cast<double>(r.k);
    const TailLimit up = BinomialUpperLimit(r.n, r.k, r.delta);
    const TailLimit lo = BinomialLowerLimit(r.n, r.k, r.delta);
    EXPECT_TRUE(up.exact);
    EXPECT_TRUE(lo.exact);
    // Each limit is the conservative end of a bisection bracket of relative
    // width 1e-12 around the root: the tail is below delta at the limit and
    // reaches it 2e-12 (relative) inside. At these n that step moves the tail
    // by ~1e-5 relative, far above Boost's own rounding.
    const auto cdf = [&](double p) {
      return boost::math::cdf(boost::math::binomial_distribution<>(n, p), k);
    };
    const auto upper_tail = [&](double p) {
      return boost::math::cdf(
          boost::math::complement(boost::math::binomial_distribution<>(n, p), k - 1.0));
    };
    EXPECT_LE(cdf(up.value), r.delta * (1 + 1e-9));
    EXPECT_GE(cdf(up.value * (1 - 2e-12)), r.delta * (1 - 1e-9));
    EXPECT_LE(upper_tail(lo.value), r.delta * (1 + 1e-9));
    EXPECT_GE(upper_tail(lo.value * (1 + 2e-12)), r.delta * (1 - 1e-9));
    const double c = -std::log(r.delta) / n;
    EXPECT_LE(up.value, KlInverseUpper(k / n, c));
    EXPECT_GE(lo.value, KlInverseLower(k / n, c));
  }
}

// Source: Boost.Math via log-space agreement: for a delta that is a normal
// double, the log-delta path must equal the plain one; for an underflowing
// delta it must satisfy its defining equation ln P(Bin(n,p) <= k) = ln delta
// (checked by the O(k) log-sum-exp, brute force).
TEST(BinomialLimitTest, LogDeltaPath) {
  EXPECT_NEAR(BinomialUpperLimitLogDelta(1000, 20, std::log(0.05)).value,
              BinomialUpperLimit(1000, 20, 0.05).value, 1e-12);
  const double log_delta = -2000.0;
  const TailLimit p = BinomialUpperLimitLogDelta(10000, 150, log_delta);
  EXPECT_TRUE(p.exact);
  EXPECT_NEAR(LogBinomialCdf(10000, 150, p.value), log_delta, 1e-6 * 2000.0);
  EXPECT_LE(LogBinomialCdf(10000, 150, p.value), log_delta);
}

// Source: Boost.Math's binomial CDF (default policy) at moderate n: the
// log-space tails must agree with it on both sides of the mode to 1e-11
// relative (a product of ~1000 term ratios carries ~1e-13 of rounding, and
// Boost its own ~1e-14).
TEST(BinomialTailTest, MatchesBoostAcrossTheMode) {
  for (std::uint64_t n : {1ULL, 7ULL, 100ULL, 5000ULL, 1000000ULL}) {
    for (double p : {1e-9, 0.001, 0.03, 0.5, 0.97, 0.999999}) {
      const boost::math::binomial_distribution<> bin(static_cast<double>(n), p);
      for (double frac : {0.0, 0.01, 0.029, 0.03, 0.031, 0.5, 0.9, 1.0}) {
        const std::uint64_t k = static_cast<std::uint64_t>(frac * static_cast<double>(n));
        SCOPED_TRACE(absl::StrCat("n=", n, " p=", p, " k=", k));
        const double cdf = boost::math::cdf(bin, static_cast<double>(k));
        if (cdf > 1e-300) {
          EXPECT_NEAR(std::exp(LogBinomialCdf(n, k, p)), cdf, 1e-11 * cdf + 1e-300);
        }
        bool exact = true;
        const double low = BinomialTailLowerBound(n, k, p, BinomialTail::kAtMost, &exact);
        EXPECT_TRUE(exact);
        EXPECT_NEAR(low, cdf, 1e-11 * cdf + 1e-300);
        if (k >= 1) {
          const double upper =
              boost::math::cdf(boost::math::complement(bin, static_cast<double>(k) - 1.0));
          EXPECT_NEAR(BinomialTailLowerBound(n, k, p, BinomialTail::kAtLeast, &exact), upper,
                      1e-11 * upper + 1e-300);
          EXPECT_TRUE(exact);
        }
      }
    }
  }
}

// Brute force: the one-tail decisions agree with the limits Certify reports
// (BinomialUpperLimit / BinomialLowerLimit compared with eps directly) on a
// grid that puts eps on, next to and far from the limits, from n = 1 to 2^53,
// wherever the limit is exact. (Where it is not, at 2^53 next to the mode,
// the reported limit is a conservative stand-in and the decision follows the
// tail itself.)
TEST(LimitDecisionTest, AgreesWithTheReportedLimits) {
  int checked = 0;
  for (std::uint64_t n : {1ULL, 10ULL, 1000ULL, 1000000ULL, 1000000000000ULL, 1ULL << 53}) {
    for (double rate : {0.0, 1e-6, 0.01, 0.3}) {
      const std::uint64_t k = static_cast<std::uint64_t>(rate * static_cast<double>(n));
      for (double delta : {0.5, 0.05, 1e-10, 1e-300}) {
        const TailLimit up_limit = BinomialUpperLimit(n, k, delta);
        const TailLimit lo_limit = BinomialLowerLimit(n, k, delta);
        const double up = up_limit.value;
        const double lo = lo_limit.value;
        for (double eps : {up, std::nextafter(up, 0.0), std::nextafter(up, 1.0), up * (1 + 1e-9),
                           up * (1 - 1e-9), lo, std::nextafter(lo, 0.0), std::nextafter(lo, 1.0),
                           lo * (1 + 1e-9), lo * (1 - 1e-9), 0.5 * (up + lo), 0.02, 0.9}) {
          if (!(eps > 0.0 && eps < 1.0)) continue;
          SCOPED_TRACE(absl::StrCat("n=", n, " k=", k, " delta=", delta, " eps=", eps));
          if (up_limit.exact) {
            EXPECT_EQ(UpperLimitAtMost(n, k, delta, eps), up <= eps);
          }
          if (lo_limit.exact) {
            EXPECT_EQ(LowerLimitAbove(n, k, delta, eps), lo > eps);
          }
          checked += up_limit.exact + lo_limit.exact;
        }
      }
    }
  }
  EXPECT_GT(checked, 1000);
}

// Regression: a kl lower inverse whose answer underflows once bisected
// arithmetically from 0 down to 1e-300 (a thousand steps per candidate, 0.6 s
// for a 10 000-candidate selection). Brute force on the definition: the
// answer is 0 exactly when kl(q || DBL_MIN) <= c, and otherwise kl(q || lo)
// >= c (up to rounding) >= kl(q || lo (1 + 2e-12)).
TEST(KlInverseTest, LowerInverseWithHugeBudgetsStaysExactAndShort) {
  for (double q : {1e-300, 1e-9, 1.0 / 3.0, 0.999}) {
    for (double c : {1e-3, 1.0, 100.0, 1e4, 1e7}) {
      SCOPED_TRACE(absl::StrCat("q=", q, " c=", c));
      const double lo = KlInverseLower(q, c);
      if (lo == 0.0) {
        EXPECT_LE(BernoulliKl(q, std::numeric_limits<double>::min()), c);
      } else {
        EXPECT_GE(BernoulliKl(q, lo), c * (1 - 1e-14));
        EXPECT_LE(BernoulliKl(q, lo * (1 + 2e-12)), c);
      }
      const double up = KlInverseUpper(q, c);
      EXPECT_LE(BernoulliKl(q, up * (1 - 2e-12)), c);
      if (up < 1.0) {
        EXPECT_GT(BernoulliKl(q, up), c);
      }
    }
  }
}

// Brute force: the search returns the first x of a monotone predicate.
TEST(SmallestSatisfyingTest, FindsThresholdAndReportsUnreachable) {
  for (std::uint64_t target : {1ULL, 2ULL, 3ULL, 1000ULL, 401379ULL, 1ULL << 50}) {
    int calls = 0;
    auto got = SmallestSatisfying(1, 1ULL << 60, [&](std::uint64_t x) {
      ++calls;
      return x >= target;
    });
    ASSERT_TRUE(got.ok());
    EXPECT_EQ(*got, target);
    EXPECT_LE(calls, 2 * 64 + 2);
  }
  EXPECT_THAT(SmallestSatisfying(1, 10, [](std::uint64_t) { return false; }),
              StatusIs(absl::StatusCode::kNotFound));
}

// Brute force: from a guess on either side of the answer the search finds it
// in about 2 log2 |answer - guess| + 1 calls, never asks the far end of the
// range first, and reports NOT_FOUND once it reaches the end.
TEST(SmallestSatisfyingTest, SearchesOutwardFromAGuess) {
  const std::uint64_t hi = 1ULL << 53;
  for (std::uint64_t target : {5ULL, 1000ULL, 401379ULL, 1ULL << 40}) {
    for (std::uint64_t guess :
         std::vector<std::uint64_t>{1, target - 1, target, target + 1, target + 5000, hi}) {
      int calls = 0;
      bool asked_hi = false;
      auto got = SmallestSatisfying(
          1, hi,
          [&](std::uint64_t x) {
            ++calls;
            asked_hi |= x == hi;
            return x >= target;
          },
          guess);
      ASSERT_TRUE(got.ok());
      EXPECT_EQ(*got, target) << "guess " << guess;
      const double distance = std::abs(static_cast<double>(target) - static_cast<double>(guess));
      EXPECT_LE(calls, 2 * std::log2(distance + 1) + 3) << "guess " << guess;
      EXPECT_EQ(asked_hi, guess == hi) << "guess " << guess;
    }
  }
  EXPECT_THAT(SmallestSatisfying(1, 1000, [](std::uint64_t) { return false; }, 10),
              StatusIs(absl::StatusCode::kNotFound));
  // Guesses outside the range are clamped to it.
  EXPECT_EQ(*SmallestSatisfying(5, 9, [](std::uint64_t x) { return x >= 7; }, 100), 7u);
  EXPECT_EQ(*SmallestSatisfying(5, 9, [](std::uint64_t x) { return x >= 2; }, 0), 5u);
}

// Source: exact integer binomials (Python math.comb, fixture log_choose.csv).
// The plain lgamma difference is off by ~4 at n = 1e15; ours is not.
TEST(LogChooseTest, MatchesExactIntegersUpToTwoToThe53) {
  for (const auto& row : ReadFixture("log_choose.csv")) {
    const double want = Num(row, "log_choose");
    EXPECT_NEAR(LogChoose(Num(row, "n"), Num(row, "k")), want, 1e-13 * want + 1e-13)
        << "n=" << row.at("n") << " k=" << row.at("k");
  }
}

// Source: lgamma identity, brute force against exact integer binomials.
TEST(LogChooseTest, MatchesExactSmallBinomials) {
  EXPECT_NEAR(LogChoose(10, 3), std::log(120.0), 1e-12);
  EXPECT_NEAR(LogChoose(52, 5), std::log(2598960.0), 1e-11);
  EXPECT_EQ(LogChoose(7, 0), 0.0);
  EXPECT_EQ(LogChoose(7, 7), 0.0);
}

}  // namespace
}  // namespace riskbound::core
