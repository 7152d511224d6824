// The gate in sequential mode (GatePolicy.sequential): every hold-out bound
// anytime-valid (anytime.h), checked against the scipy reference of the
// limits, the ledger, the reasons and the HOLD plan. The re-run soundness is
// tests/soundness/sequential_test.cc.
#include <cstdint>
#include <string>
#include <vector>

#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "service/core/anytime.h"
#include "service/core/gate.h"
#include "tests/testing/fixture.h"
#include "tests/testing/status_matchers.h"

namespace riskbound::core {
namespace {

using ::riskbound::testing::Num;
using ::riskbound::testing::ReadFixture;
using ::riskbound::testing::StatusIs;
using ::testing::Contains;
using ::testing::HasSubstr;

GatePolicy Sequential(double max_risk, double delta) {
  GatePolicy p;
  p.max_risk = max_risk;
  p.failure_probability = delta;
  p.sequential = true;
  return p;
}

GateCandidate Candidate(std::uint64_t errors, std::uint64_t samples) {
  GateCandidate c;
  c.id = "model-s";
  c.evidence.holdout = SampleCounts{errors, samples};
  return c;
}

// Source: scipy fixture anytime.csv (fixtures_anytime.py, betaln/betainc +
// brentq): the row 500 / 10000 at delta 0.0125, the share of each risk bound
// of a delta = 0.025 policy without a champion.
TEST(GateSequentialTest, RiskBoundsAreTheAnytimeLimits) {
  double want_up = 0, want_lo = 0;
  for (const auto& row : ReadFixture("anytime.csv")) {
    if (Num(row, "samples") == 10000 && Num(row, "errors") == 500 && Num(row, "delta") == 0.0125) {
      want_up = Num(row, "upper");
      want_lo = Num(row, "lower");
    }
  }
  ASSERT_GT(want_up, 0.0);
  absl::StatusOr<GateDecision> d =
      DecideGate(Sequential(0.06, 0.025), Candidate(500, 10000), std::nullopt, StopToken::Never());
  ASSERT_TRUE(d.ok()) << d.status();
  EXPECT_NEAR(d->risk_certificate.risk_upper_bound, want_up, 1e-9 * want_up);
  ASSERT_TRUE(d->risk_lower_bound.has_value());
  EXPECT_NEAR(*d->risk_lower_bound, want_lo, 1e-9 * want_lo);
  EXPECT_EQ(d->verdict, Verdict::kPromote);  // 0.0575 <= 0.06
  EXPECT_EQ(d->families_used, std::vector<Family>{Family::kHoldoutAnytime});
  ASSERT_EQ(d->delta_ledger.size(), 2u);
  EXPECT_EQ(d->delta_ledger[0].test, "risk upper bound: holdout-anytime");
  EXPECT_EQ(d->delta_ledger[1].test, "risk lower bound: holdout-anytime (anytime-valid)");
  EXPECT_THAT(d->reasons, Contains(HasSubstr("sequential mode: every hold-out bound is "
                                             "anytime-valid")));
  // The same counts under a fixed-size policy promote at a tighter bound.
  GatePolicy fixed = Sequential(0.06, 0.025);
  fixed.sequential = false;
  absl::StatusOr<GateDecision> f =
      DecideGate(fixed, Candidate(500, 10000), std::nullopt, StopToken::Never());
  ASSERT_TRUE(f.ok());
  EXPECT_LT(f->risk_certificate.risk_upper_bound, d->risk_certificate.risk_upper_bound);
}

TEST(GateSequentialTest, FixedSizeHoldoutFamiliesAreRefused) {
  GatePolicy p = Sequential(0.05, 0.05);
  p.allowed_families = {Family::kHoldoutAnytime, Family::kHoldoutExactBinomial};
  EXPECT_THAT(DecideGate(p, Candidate(10, 1000), std::nullopt, StopToken::Never()).status(),
              StatusIs(absl::StatusCode::kInvalidArgument,
                       HasSubstr("policy.allowed_families[1]: holdout-binomial holds for one "
                                 "look")));
  p.allowed_families = {Family::kHoldoutAnytime, Family::kHoldoutKlChernoff};
  EXPECT_THAT(
      DecideGate(p, Candidate(10, 1000), std::nullopt, StopToken::Never()).status(),
      StatusIs(absl::StatusCode::kInvalidArgument, HasSubstr("policy.allowed_families[1]")));
}

// The HOLD plan is PlanAnytime's at the risk upper bound's share.
TEST(GateSequentialTest, HoldPlanIsForTheAnytimeBounds) {
  absl::StatusOr<GateDecision> d =
      DecideGate(Sequential(0.05, 0.05), Candidate(40, 1000), std::nullopt, StopToken::Never());
  ASSERT_TRUE(d.ok()) << d.status();
  ASSERT_EQ(d->verdict, Verdict::kHold);
  absl::StatusOr<std::uint64_t> n = PlanAnytime(0.05, 0.04, 0.025, 0.8, 1000, StopToken::Never());
  ASSERT_TRUE(n.ok());
  ASSERT_TRUE(d->additional_sample_count.has_value());
  EXPECT_EQ(*d->additional_sample_count, *n - 1000);
  EXPECT_THAT(d->reasons, Contains(HasSubstr("under the anytime-valid bounds (sequential mode)")));
}

// Paired comparison: the Bonferroni pair of anytime limits, each at half the
// difference share (delta / 8 for a delta = 0.05 policy with a champion).
TEST(GateSequentialTest, PairedDifferenceUsesAnytimeLimits) {
  ChampionComparison ch;
  ch.champion_id = "model-r";
  ch.paired = PairedCounts{200, 150, 100, 10000};
  absl::StatusOr<GateDecision> d =
      DecideGate(Sequential(0.05, 0.05), Candidate(300, 10000), ch, StopToken::Never());
  ASSERT_TRUE(d.ok()) << d.status();
  const double share = 0.05 / 8;
  EXPECT_DOUBLE_EQ(*d->difference_upper_bound, AnytimeUpperLimit(10000, 100, share).value -
                                                   AnytimeLowerLimit(10000, 150, share).value);
  EXPECT_DOUBLE_EQ(*d->difference_lower_bound, AnytimeLowerLimit(10000, 100, share).value -
                                                   AnytimeUpperLimit(10000, 150, share).value);
  EXPECT_EQ(d->delta_ledger[2].test, "difference upper bound: paired anytime-valid pair");
  EXPECT_LE(d->spent_failure_probability, 0.05);
}

// The paired-comparison plan of a HOLD enumerates the anytime limits: it asks
// for more samples than the fixed-size plan for the same counts (the limits
// are wider), and says which limits it planned for.
TEST(GateSequentialTest, PairedPlanIsForTheAnytimeLimits) {
  ChampionComparison ch;
  ch.champion_id = "model-r";
  ch.paired = PairedCounts{20, 30, 20, 2000};
  absl::StatusOr<GateDecision> seq =
      DecideGate(Sequential(0.05, 0.05), Candidate(40, 2000), ch, StopToken::Never());
  ASSERT_TRUE(seq.ok()) << seq.status();
  ASSERT_EQ(seq->verdict, Verdict::kHold);
  ASSERT_TRUE(seq->additional_sample_count.has_value());
  EXPECT_THAT(seq->reasons, Contains(HasSubstr("for the anytime-valid limits of sequential mode")));
  GatePolicy fixed = Sequential(0.05, 0.05);
  fixed.sequential = false;
  absl::StatusOr<GateDecision> fix = DecideGate(fixed, Candidate(40, 2000), ch, StopToken::Never());
  ASSERT_TRUE(fix.ok()) << fix.status();
  ASSERT_EQ(fix->verdict, Verdict::kHold);
  ASSERT_TRUE(fix->additional_sample_count.has_value());
  EXPECT_GT(*seq->additional_sample_count, *fix->additional_sample_count);
}

}  // namespace
}  // namespace riskbound::core
