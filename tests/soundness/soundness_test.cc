// Fast-mode Monte-Carlo soundness checks (runs in ctest): every registered
// scenario at a few thousand simulated datasets, asserting for every family
//   coverage >= 1 - delta - 3 sqrt(delta (1 - delta) / T)
// and, where the sampling distribution is a single binomial, that the EXACT
// coverage (binomial pmf from Boost.Math) is >= 1 - delta and agrees with an
// independent scipy computation. The full mode is soundness_report.cc.
#include <cmath>
#include <cstdint>
#include <functional>
#include <iostream>
#include <string>
#include <vector>

#include "absl/strings/str_format.h"
#include "gtest/gtest.h"
#include "service/core/holdout.h"
#include "tests/soundness/simulate.h"

namespace riskbound::soundness {
namespace {

constexpr std::int64_t kFastTrials = 3000;
constexpr std::uint64_t kFastSeed = 20240611;

void CheckRows(const std::vector<CoverageRow>& rows) {
  ASSERT_FALSE(rows.empty());
  int index = 0;
  for (const CoverageRow& r : rows) {
    const std::string text = DescribeRow(r);
    std::cout << text << "\n";
    ::testing::Test::RecordProperty(absl::StrFormat("row%02d", index++), text);
    // The criteria (CheckRow, simulate.h): Monte-Carlo floor
    // 1 - delta - 3 sqrt(delta (1 - delta) / T); exact coverage >= 1 - delta;
    // simulation within 4 standard errors of the exact binomial coverage
    // (Boost.Math pmf); exact coverage equal to the reference values to 4
    // decimals (Source: exact coverage sum computed independently in Python
    // with scipy.stats.binom.pmf, simulate.cc).
    for (const std::string& failure : CheckRow(r)) ADD_FAILURE() << failure << "\n  " << text;
  }
}

class ScenarioTest : public ::testing::TestWithParam<std::string> {};

TEST_P(ScenarioTest, CoverageAtLeastOneMinusDelta) {
  for (const Scenario& s : Scenarios()) {
    if (s.name != GetParam()) continue;
    CheckRows(s.run(kFastTrials, kFastSeed));
    return;
  }
  FAIL() << "scenario " << GetParam() << " not registered";
}

std::vector<std::string> ScenarioNames() {
  std::vector<std::string> names;
  for (const Scenario& s : Scenarios()) names.push_back(s.name);
  return names;
}

INSTANTIATE_TEST_SUITE_P(Fast, ScenarioTest, ::testing::ValuesIn(ScenarioNames()),
                         [](const ::testing::TestParamInfo<std::string>& info) {
                           std::string n = info.param;
                           for (char& c : n) {
                             if (c == '-') c = '_';
                           }
                           return n;
                         });

// Exact worst case over the true risk p: the minimum over p of the exact
// coverage of each hold-out family (and of Certify's minimum over them) is
// >= 1 - delta. Source: the binomial pmf (Boost.Math); Clopper & Pearson
// (1934) guarantee this for the exact inversion, Hoeffding (1963) and
// Chernoff (1952) for the relaxations.
TEST(ExactHoldoutScanTest, WorstCaseCoverageOverTrueRisk) {
  for (const std::uint64_t n : {10ULL, 57ULL, 200ULL}) {
    for (const double delta : {0.05, 0.01}) {
      const std::vector<CoverageRow> rows = ExactHoldoutScan(n, delta, 200);
      ASSERT_EQ(rows.size(), 4u);
      CheckRows(rows);
    }
  }
}

// Negative control: the harness must have the power to reject an invalid
// bound. A Clopper-Pearson limit computed at 4 delta but reported as a
// 1 - delta bound, and the plug-in rate k/n, must both fail CheckRow.
// Source: Boost.Math binomial pmf for the exact coverage.
TEST(HarnessTest, RejectsInvalidBounds) {
  const std::uint64_t n = 1000;
  const double p = 0.05;
  const double delta = 0.05;
  const auto too_small = [&](std::uint64_t k) {
    return core::HoldoutExactBinomial({k, n}, 4.0 * delta).risk_upper_bound;
  };
  const auto plug_in = [&](std::uint64_t k) { return static_cast<double>(k) / n; };
  for (const auto& bound : {std::function<double(std::uint64_t)>(too_small),
                            std::function<double(std::uint64_t)>(plug_in)}) {
    Rng rng = MakeRng(kFastSeed, 99);
    Tally tally;
    for (std::int64_t t = 0; t < kFastTrials; ++t) tally.Add(bound(DrawBinomial(rng, n, p)), p);
    CoverageRow row = tally.Row("negative control", "invalid", "fixed classifier", delta);
    EXPECT_LT(row.coverage, row.floor) << DescribeRow(row);
    row.exact_coverage = ExactBinomialCoverage(n, p, bound);
    EXPECT_LT(*row.exact_coverage, 1.0 - delta - 0.05) << DescribeRow(row);
    EXPECT_GE(CheckRow(row).size(), 2u) << DescribeRow(row);
  }
}

// Source: brute force. MonteCarloFloor at T = 1e5, delta = 0.05 is
// 0.95 - 3 sqrt(0.0475 / 1e5) = 0.947932...
TEST(HarnessTest, MonteCarloFloor) {
  EXPECT_NEAR(MonteCarloFloor(0.05, 100000), 0.95 - 3.0 * std::sqrt(0.0475e-5), 1e-15);
  EXPECT_NEAR(MonteCarloFloor(0.05, 100000), 0.9479324, 1e-7);
}

// Source: brute force (midpoint rule with 10^6 cells over x in [0, 1]).
TEST(HarnessTest, ThresholdTrueRiskMatchesNumericalIntegration) {
  const int cells = 1000000;
  for (const double noise : {0.0, 0.1, 0.3}) {
    for (const double t : {0.0, 0.13, 0.5, 0.77, 1.0}) {
      double err = 0.0;
      for (int i = 0; i < cells; ++i) {
        const double x = (i + 0.5) / cells;
        const bool predict = x > t;
        const bool clean = x > 0.5;
        err += (predict == clean) ? noise : 1.0 - noise;
      }
      EXPECT_NEAR(ThresholdTrueRisk(t, noise), err / cells, 2e-6) << t << " " << noise;
    }
  }
}

// Source: brute force (direct count of h_j(x_i) != y_i for every j).
TEST(HarnessTest, GridErrorsMatchDirectCount) {
  Rng rng = MakeRng(7, 7);
  for (int rep = 0; rep < 20; ++rep) {
    LabeledSample s = DrawThresholdSample(rng, 150, 0.2);
    // Include exact grid points and the ends, where rounding could misplace x.
    s.x.push_back(0.5);
    s.y.push_back(1);
    s.x.push_back(ThresholdValue(37));
    s.y.push_back(0);
    s.x.push_back(1.0);
    s.y.push_back(1);
    s.x.push_back(0.0);
    s.y.push_back(0);
    const auto fast = GridErrors(s);
    for (int j = 0; j < kThresholdCount; ++j) {
      std::uint64_t direct = 0;
      for (std::size_t i = 0; i < s.x.size(); ++i) {
        const int predict = s.x[i] > ThresholdValue(j) ? 1 : 0;
        if (predict != s.y[i]) ++direct;
      }
      EXPECT_EQ(fast[j], direct) << j;
    }
  }
}

// Source: Beta(a, b) moments, mean a/(a+b), variance ab/((a+b)^2 (a+b+1));
// 200000 draws, 5 standard errors.
TEST(HarnessTest, BetaDrawMoments) {
  Rng rng = MakeRng(11, 0);
  for (const auto& [a, b] : {std::pair{0.5, 5.0}, std::pair{2.0, 2.0}}) {
    const int draws = 200000;
    double sum = 0.0;
    double sum2 = 0.0;
    for (int i = 0; i < draws; ++i) {
      const double z = DrawBeta(rng, a, b);
      ASSERT_GE(z, 0.0);
      ASSERT_LE(z, 1.0);
      sum += z;
      sum2 += z * z;
    }
    const double mean = a / (a + b);
    const double var = a * b / ((a + b) * (a + b) * (a + b + 1.0));
    EXPECT_NEAR(sum / draws, mean, 5.0 * std::sqrt(var / draws));
    EXPECT_NEAR(sum2 / draws - (sum / draws) * (sum / draws), var, 0.02 * var + 1e-5);
  }
}

}  // namespace
}  // namespace riskbound::soundness
