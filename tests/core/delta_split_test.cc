// δ is never overspent, not even by rounding (issue 12): the directed-rounding
// helpers and the exact sum of delta_split.h, then Certify, SelectStructure
// and DecideGate, whose reported shares must add up, exactly, to at most the
// requested failure probability.
//
// The outside reference is IEEE 754 binary128 (GCC's __float128, a 113-bit
// significand): the product of two doubles (53 + 53 bits), and the sum of up
// to 2^7 doubles whose exponents span less than 113 - 53 - 7 = 53 binades,
// are exact in it, so comparisons made there are exact rational comparisons.
// Source: IEEE 754-2008, binary128 format (3.6); exactness of the products
// and sums by counting significand bits.
#include "service/core/delta_split.h"

#include <cfloat>
#include <cmath>
#include <cstdint>
#include <limits>
#include <random>
#include <string>
#include <vector>

#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "service/core/certify.h"
#include "service/core/families.h"
#include "service/core/gate.h"
#include "service/core/select.h"
#include "tests/testing/status_matchers.h"

namespace riskbound::core {
namespace {

using Quad = __float128;
using ::riskbound::testing::StatusIs;
using ::testing::HasSubstr;

// A few hundred failure probabilities: a log-spaced grid from 1e-12 to 0.99
// and values people type (0.05, 0.1, 1e-9, 1/3, ...), each also one double
// up and down.
std::vector<double> Deltas() {
  std::vector<double> out;
  for (int i = 0; i <= 80; ++i) out.push_back(std::pow(10.0, -12.0 + 12.0 * i / 80.0) * 0.99);
  for (double d : {0.05, 0.1, 0.01, 0.001, 1e-9, 0.3, 0.2, 0.07, 1.0 / 3.0, 0.5, 0.9, 0.999,
                   2.0 / 7.0, 1e-6, 0.025, 0.15}) {
    out.push_back(d);
    out.push_back(std::nextafter(d, 0.0));
    out.push_back(std::nextafter(d, 1.0));
  }
  std::mt19937_64 rng(20261202);
  std::uniform_real_distribution<double> u(0.0, 1.0);
  for (int i = 0; i < 150; ++i) out.push_back(std::pow(10.0, -15.0 * u(rng)) * 0.999);
  return out;
}

Quad QuadSum(const std::vector<double>& xs) {
  Quad s = 0;
  for (double x : xs) s += static_cast<Quad>(x);
  return s;
}

TEST(DirectedRoundingTest, EachOperationLandsOnItsSideNextToTheExactValue) {
  // Source: binary128 holds a product of two doubles exactly; a quotient q is
  // on the right side of a/b iff q*b (exact in binary128) is on that side of a.
  std::mt19937_64 rng(7);
  std::uniform_real_distribution<double> mant(0.5, 1.0);
  std::uniform_int_distribution<int> expo(-60, 60);
  for (int i = 0; i < 20000; ++i) {
    const double a = std::ldexp(mant(rng), expo(rng));
    const double b = std::ldexp(mant(rng), expo(rng));
    const Quad exact_product = static_cast<Quad>(a) * static_cast<Quad>(b);
    const double pu = ProductUp(a, b), pd = ProductDown(a, b);
    EXPECT_GE(static_cast<Quad>(pu), exact_product);
    EXPECT_LT(static_cast<Quad>(std::nextafter(pu, 0.0)), exact_product);
    EXPECT_LE(static_cast<Quad>(pd), exact_product);
    EXPECT_GT(static_cast<Quad>(std::nextafter(pd, INFINITY)), exact_product);
    const double qu = QuotientUp(a, b), qd = QuotientDown(a, b);
    EXPECT_GE(static_cast<Quad>(qu) * b, static_cast<Quad>(a));
    EXPECT_LT(static_cast<Quad>(std::nextafter(qu, 0.0)) * b, static_cast<Quad>(a));
    EXPECT_LE(static_cast<Quad>(qd) * b, static_cast<Quad>(a));
    EXPECT_GT(static_cast<Quad>(std::nextafter(qd, INFINITY)) * b, static_cast<Quad>(a));
    // Sums of doubles within 2^40 of each other are exact in binary128.
    const double c = (i % 2 == 0 ? -1.0 : 1.0) * std::ldexp(mant(rng), expo(rng) % 40);
    const double a2 = std::ldexp(mant(rng), expo(rng) % 40);
    const Quad exact_sum = static_cast<Quad>(a2) + static_cast<Quad>(c);
    const double su = SumUp(a2, c), sd = SumDown(a2, c);
    EXPECT_GE(static_cast<Quad>(su), exact_sum);
    EXPECT_LT(static_cast<Quad>(std::nextafter(su, -INFINITY)), exact_sum);
    EXPECT_LE(static_cast<Quad>(sd), exact_sum);
    EXPECT_GT(static_cast<Quad>(std::nextafter(sd, INFINITY)), exact_sum);
  }
}

TEST(ExactSumTest, RoundsTheExactSumUp) {
  // Source: binary128 sums of up to 20 doubles spanning 2^-40 .. 2^1 (exact).
  std::mt19937_64 rng(11);
  std::uniform_real_distribution<double> mant(0.5, 1.0);
  std::uniform_int_distribution<int> expo(-40, 0);
  for (int trial = 0; trial < 5000; ++trial) {
    std::vector<double> xs(1 + trial % 20);
    for (double& x : xs) x = std::ldexp(mant(rng), expo(rng));
    const Quad exact = QuadSum(xs);
    const double up = SpentOf(xs);
    EXPECT_GE(static_cast<Quad>(up), exact);
    EXPECT_LT(static_cast<Quad>(std::nextafter(up, 0.0)), exact);
  }
  // Subnormals and the smallest double are summed exactly too.
  ExactSum s;
  s.Add(std::numeric_limits<double>::denorm_min());
  s.Add(std::numeric_limits<double>::denorm_min());
  EXPECT_EQ(s.RoundedUp(), 2 * std::numeric_limits<double>::denorm_min());
  // 1 + 2^-60 rounds up to the double after 1.
  EXPECT_EQ(SpentOf({1.0, std::ldexp(1.0, -60)}), std::nextafter(1.0, 2.0));
  EXPECT_EQ(SpentOf({}), 0.0);
}

TEST(WeightSumTest, ExactNotRounded) {
  // Source: exact binary expansions (Python fractions.Fraction(0.2) +
  // Fraction(0.8) - 1 = 2^-54; Fraction(0.6) + Fraction(0.4) - 1 = 0;
  // Fraction(0.7) + Fraction(0.3) - 1 = -2^-54).
  EXPECT_FALSE(WeightsSumAtMostOne({0.5, 0.5000000000000001}));
  EXPECT_FALSE(WeightsSumAtMostOne({0.2, 0.8}));
  EXPECT_TRUE(WeightsSumAtMostOne({0.6, 0.4}));
  EXPECT_TRUE(WeightsSumAtMostOne({0.7, 0.3}));
  EXPECT_TRUE(WeightsSumAtMostOne({0.25, 0.75}));
  std::vector<double> tenths(10, 0.1);  // 0.1 is above 1/10
  EXPECT_FALSE(WeightsSumAtMostOne(tenths));
  EXPECT_THAT(WeightSumMessage({0.2, 0.8}, "weights"),
              HasSubstr("weights[1] = 0.79999999999999993"));
}

TEST(SharesTest, EqualAndInverseSquareSharesNeverAddUpPastTheTotal) {
  for (double delta : Deltas()) {
    for (std::size_t k = 1; k <= 20; ++k) {
      const double share = EqualShare(delta, k);
      // The largest double whose k-fold is at most delta. Source: binary128.
      EXPECT_LE(static_cast<Quad>(share) * k, static_cast<Quad>(delta)) << delta << " " << k;
      EXPECT_GT(static_cast<Quad>(std::nextafter(share, 1.0)) * k, static_cast<Quad>(delta));
    }
  }
  // Each weight at most 6/(pi^2 k^2), within 4 units in the last place; pi
  // as the double pair M_PI + 1.2246467991473532e-16 (pi - M_PI, from memory;
  // about 107 correct bits; the Python test checks the weights against
  // Machin's formula).
  const Quad pi = static_cast<Quad>(M_PI) + static_cast<Quad>(1.2246467991473532e-16);
  const Quad six_over_pi2 = static_cast<Quad>(6) / (pi * pi);
  Quad sum = 0;
  for (std::size_t k = 1; k <= 10000; ++k) {
    const double w = InverseSquareWeight(k);
    const Quad exact = six_over_pi2 / (static_cast<Quad>(k) * k);
    EXPECT_LE(static_cast<Quad>(w), exact) << k;
    EXPECT_GT(static_cast<Quad>(w), exact * (1 - 4 * static_cast<Quad>(DBL_EPSILON))) << k;
    sum += w;
  }
  EXPECT_LT(sum, static_cast<Quad>(1));
}

TEST(FailureProbabilityTextTest, NeverBelowTheValue) {
  // Source: the printed decimal parsed back (strtod) against the double.
  EXPECT_EQ(FailureProbabilityText(0.05), "0.05");
  EXPECT_EQ(FailureProbabilityText(1e-9), "1e-09");
  EXPECT_EQ(FailureProbabilityText(0.0123456789), "0.0123457");
  EXPECT_EQ(FailureProbabilityText(0.01234561), "0.0123457");  // %g would say 0.0123456
  EXPECT_EQ(FailureProbabilityText(0.0999999999), "0.1");
  EXPECT_EQ(FailureProbabilityText(9.999995e-5), "0.0001");
  std::mt19937_64 rng(3);
  std::uniform_real_distribution<double> u(0.0, 1.0);
  for (int i = 0; i < 20000; ++i) {
    const double p = std::pow(10.0, -20.0 * u(rng));
    const std::string text = FailureProbabilityText(p);
    EXPECT_GE(std::strtod(text.c_str(), nullptr), p) << text;
    EXPECT_LE(std::strtod(text.c_str(), nullptr), p * (1 + 1.1e-5)) << text;
  }
}

// A holdout + training (VC) + bounded loss + PAC-Bayes + Rademacher +
// compression evidence: 13 families apply at once.
Evidence EveryKind() {
  Evidence e;
  e.holdout = SampleCounts{12, 4000};
  e.training = TrainingEvidence{{30, 5000}, ClassCapacity{}};
  e.training->capacity.vc_dimension = 10;
  e.bounded_loss = BoundedLossEvidence{0.3, 0.04, 800, 0.0, 2.0};
  e.pac_bayes = PacBayesEvidence{5.0, 0.03, 10000, PacBayesTarget::kGibbs};
  e.rademacher = RademacherEvidence{{40, 2000}, 0.05, 0};
  e.compression = CompressionEvidence{10000, 30, 0, true};
  return e;
}

TEST(NeverOverspentTest, CertifyListedAndAll) {
  std::vector<std::optional<Family>> families;
  for (const FamilySpec& spec : Families()) {
    if (spec.applies(EveryKind())) families.push_back(spec.family);
  }
  ASSERT_GE(families.size(), 12u);
  for (double delta : Deltas()) {
    for (std::size_t k = 1; k <= families.size(); ++k) {
      CertifyRequest req;
      req.evidence = EveryKind();
      req.failure_probability = delta;
      req.family_choice = FamilyChoice::kListed;
      req.listed.families.assign(families.begin(), families.begin() + k);
      auto got = Certify(req);
      ASSERT_TRUE(got.ok()) << got.status();
      std::vector<double> shares;
      for (const Certificate& c : got->certificates) shares.push_back(c.failure_probability);
      const Quad exact = QuadSum(shares);
      EXPECT_LE(exact, static_cast<Quad>(delta)) << delta << " K=" << k;
      EXPECT_LE(got->spent_failure_probability, delta);
      EXPECT_GE(static_cast<Quad>(got->spent_failure_probability), exact);
      // Nothing given away: within K units in the last place of delta.
      EXPECT_GT(exact, static_cast<Quad>(delta) * (1 - 2.0 * k * DBL_EPSILON));
    }
  }
  // Issue 12: --family all at delta 1e-9 reported 1.0000000000000003e-09.
  CertifyRequest all;
  all.evidence = EveryKind();
  all.failure_probability = 1e-9;
  all.family_choice = FamilyChoice::kAllApplicable;
  auto got = Certify(all);
  ASSERT_TRUE(got.ok());
  EXPECT_LE(got->spent_failure_probability, 1e-9);
}

TEST(NeverOverspentTest, CertifyCallerWeights) {
  std::mt19937_64 rng(5);
  std::uniform_real_distribution<double> u(0.0, 1.0);
  const std::vector<std::optional<Family>> three = {
      Family::kHoldoutExactBinomial, Family::kHoldoutKlChernoff, Family::kHoldoutHoeffding};
  for (double delta : Deltas()) {
    // Weights summing to 1 in decimal, which as doubles may exceed 1: kept
    // when the exact sum is at most 1, else refused naming the field.
    const double a = std::round(u(rng) * 1000) / 1000;
    const double b = std::round(u(rng) * (1000 - a * 1000)) / 1000;
    const std::vector<double> w = {a > 0 ? a : 0.001, b > 0 ? b : 0.001,
                                   std::max(0.001, 1.0 - a - b)};
    CertifyRequest req;
    req.evidence = EveryKind();
    req.failure_probability = delta;
    req.family_choice = FamilyChoice::kListed;
    req.listed.families = three;
    req.listed.delta_weights = w;
    auto got = Certify(req);
    if (!WeightsSumAtMostOne(w)) {
      EXPECT_THAT(got, StatusIs(absl::StatusCode::kInvalidArgument,
                                HasSubstr("listed.delta_weights")));
      continue;
    }
    ASSERT_TRUE(got.ok()) << got.status();
    std::vector<double> shares;
    for (const Certificate& c : got->certificates) shares.push_back(c.failure_probability);
    EXPECT_LE(QuadSum(shares), static_cast<Quad>(delta));
    EXPECT_LE(got->spent_failure_probability, delta);
    for (std::size_t i = 0; i < 3; ++i) {
      EXPECT_LE(static_cast<Quad>(shares[i]), static_cast<Quad>(delta) * w[i]);
    }
  }
}

TEST(NeverOverspentTest, SelectEverySpread) {
  for (double delta : Deltas()) {
    for (std::size_t k = 1; k <= 20; ++k) {
      for (DeltaSpread spread :
           {DeltaSpread::kUniform, DeltaSpread::kInverseSquare, DeltaSpread::kCallerWeights}) {
        SelectRequest req;
        req.family = Family::kVcAdditive;
        req.failure_probability = delta;
        req.delta_spread = spread;
        for (std::size_t i = 0; i < k; ++i) {
          StructureCandidate c;
          c.id = "c" + std::to_string(i);
          c.error_count = 100 - i;
          c.sample_count = 10000;
          c.capacity.vc_dimension = 1 + i;
          req.structure.push_back(c);
          // Caller weights 1/(k+1) each and the rest to the last: decimal
          // sums of 1 that the exact check must judge.
          if (spread == DeltaSpread::kCallerWeights) req.weights.push_back(1.0 / (k + 1));
        }
        if (spread == DeltaSpread::kCallerWeights) req.weights.back() = 2.0 / (k + 1);
        auto got = SelectStructure(req);
        if (spread == DeltaSpread::kCallerWeights && !WeightsSumAtMostOne(req.weights)) {
          EXPECT_THAT(got, StatusIs(absl::StatusCode::kInvalidArgument, HasSubstr("weights")));
          continue;
        }
        ASSERT_TRUE(got.ok()) << got.status();
        std::vector<double> shares, weights;
        for (const CandidateBound& c : got->candidates) {
          shares.push_back(c.failure_probability);
          weights.push_back(c.delta_weight);
        }
        const Quad exact = QuadSum(shares);
        EXPECT_LE(exact, static_cast<Quad>(delta)) << delta << " K=" << k;
        EXPECT_LE(QuadSum(weights), static_cast<Quad>(1));
        EXPECT_LE(got->spent_failure_probability, delta);
        EXPECT_GE(static_cast<Quad>(got->spent_failure_probability), exact);
      }
    }
  }
  // Issue 12: a uniform spread over 10 at 0.05 reported 0.05000000000000002.
  SelectRequest ten;
  ten.family = Family::kVcAdditive;
  ten.delta_spread = DeltaSpread::kUniform;
  for (int i = 0; i < 10; ++i) {
    StructureCandidate c;
    c.id = "m" + std::to_string(i);
    c.error_count = 10;
    c.sample_count = 1000;
    c.capacity.vc_dimension = 1 + i;
    ten.structure.push_back(c);
  }
  auto got = SelectStructure(ten);
  ASSERT_TRUE(got.ok());
  EXPECT_LE(got->spent_failure_probability, 0.05);
  ten.delta_spread = DeltaSpread::kCallerWeights;
  ten.weights.assign(10, 0.05);
  ten.weights[0] = 0.5;
  ten.weights[1] = 0.5000000000000001;
  EXPECT_THAT(SelectStructure(ten), StatusIs(absl::StatusCode::kInvalidArgument,
                                             HasSubstr("weights")));
}

TEST(NeverOverspentTest, GateLedger) {
  const std::vector<std::optional<Family>> holdout = {
      Family::kHoldoutExactBinomial, Family::kHoldoutKlChernoff, Family::kHoldoutHoeffding};
  for (double delta : Deltas()) {
    for (std::size_t k = 1; k <= 3; ++k) {
      GatePolicy policy;
      // Settled for most deltas (the HOLD planner is not what is tested).
      policy.max_risk = 0.05;
      policy.max_regression = 0.02;
      policy.failure_probability = delta;
      policy.allowed_families.assign(holdout.begin(), holdout.begin() + k);
      GateCandidate candidate;
      candidate.id = "m";
      candidate.evidence.holdout = SampleCounts{12, 4000};
      ChampionComparison champ;
      champ.champion_id = "c";
      champ.paired = PairedCounts{8, 6, 4, 4000};
      for (const auto& c : {std::optional<ChampionComparison>(), std::optional(champ)}) {
        auto d = DecideGate(policy, candidate, c);
        ASSERT_TRUE(d.ok()) << d.status();
        std::vector<double> shares;
        for (const DeltaSpend& s : d->delta_ledger) shares.push_back(s.failure_probability);
        EXPECT_LE(QuadSum(shares), static_cast<Quad>(delta)) << delta << " K=" << k;
        EXPECT_LE(d->spent_failure_probability, delta);
        EXPECT_GE(static_cast<Quad>(d->spent_failure_probability), QuadSum(shares));
      }
    }
  }
}

}  // namespace
}  // namespace riskbound::core
