// Slices: validation, shares, the certify worst-slice statement and the
// slice gate.
#include "service/core/slices.h"

#include <cmath>
#include <cstdint>
#include <string>
#include <vector>

#include <boost/math/distributions/binomial.hpp>

#include "absl/strings/str_join.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "service/core/certify.h"
#include "service/core/gate.h"
#include "service/core/plan.h"
#include "tests/testing/status_matchers.h"

namespace riskbound::core {
namespace {

using ::riskbound::testing::StatusIs;
using ::testing::HasSubstr;
using ::testing::Not;

using Binomial = boost::math::binomial_distribution<>;

// Boost.Math's one-sided Clopper-Pearson limits: the outside reference.
double BoostUpper(std::uint64_t n, std::uint64_t k, double delta) {
  if (k >= n) return 1.0;
  return Binomial::find_upper_bound_on_p(static_cast<double>(n), static_cast<double>(k), delta);
}
double BoostLower(std::uint64_t n, std::uint64_t k, double delta) {
  if (k == 0) return 0.0;
  return Binomial::find_lower_bound_on_p(static_cast<double>(n), static_cast<double>(k), delta);
}

SliceEvidence Slice(const std::string& name, std::uint64_t errors, std::uint64_t samples) {
  SliceEvidence s;
  s.name = name;
  s.error_count = errors;
  s.sample_count = samples;
  return s;
}

std::vector<SliceEvidence> ThreeSlices() {
  return {Slice("north", 12, 900), Slice("south", 40, 500), Slice("coast", 3, 300)};
}

std::string Fields(const absl::Status& s) {
  std::vector<std::string> out;
  for (const FieldViolation& v : FieldViolationsOf(s)) out.push_back(v.field);
  return absl::StrJoin(out, " ");
}

// Source: Sidak (1967): the per-test level 1 - (1 - alpha)^(1/m); computed
// here in long double with powl as an independent check.
TEST(SliceSharesTest, SidakShareIsJustBelowTheExactValue) {
  for (double total : {0.05, 0.01, 1e-6, 0.3}) {
    for (std::size_t g : {1u, 2u, 3u, 7u, 50u, 1000u}) {
      const double share = SidakShare(total, g);
      const long double exact =
          1.0L - powl(1.0L - static_cast<long double>(total), 1.0L / static_cast<long double>(g));
      EXPECT_LE(static_cast<long double>(share), exact) << total << " " << g;
      EXPECT_NEAR(static_cast<double>(share / exact), 1.0, 2e-9) << total << " " << g;
      // Larger than the Bonferroni share, by at most about a factor 1 + total/2.
      EXPECT_GE(share, total / static_cast<double>(g));
      EXPECT_LE(share, total / static_cast<double>(g) * (1.0 + total));
    }
  }
}

// The Sidak shares' combined spend 1 - (1 - s)^G is at most the total and
// within 1e-8 of it. Source: Sidak (1967), product of independent events.
TEST(SliceSharesTest, SidakSpentCombinesAsAProduct) {
  std::vector<SliceEvidence> slices(40, Slice("x", 1, 10));
  for (std::size_t i = 0; i < slices.size(); ++i) slices[i].name = std::to_string(i);
  SliceSharing sharing;
  sharing.rule = SliceShareRule::kSidak;
  const std::vector<double> shares = SliceShares(sharing, slices, 0.05);
  const double spent = SlicesSpent(SliceShareRule::kSidak, shares, 0.05);
  const long double product = powl(1.0L - static_cast<long double>(shares[0]), 40.0L);
  EXPECT_LE(spent, 0.05);
  EXPECT_GE(static_cast<long double>(spent), 1.0L - product);
  EXPECT_NEAR(spent, 0.05, 1e-8);
  // The plain sum would claim more than 0.05.
  EXPECT_GT(shares[0] * 40.0, 0.05);
}

TEST(SliceSharesTest, BonferroniWeightsFollowTheNames) {
  SliceSharing sharing;
  sharing.weights = {{"south", 0.5}, {"north", 0.25}, {"coast", 0.25}};
  const std::vector<double> shares = SliceShares(sharing, ThreeSlices(), 0.04);
  EXPECT_EQ(shares[0], 0.01);  // north
  EXPECT_EQ(shares[1], 0.02);  // south
  EXPECT_EQ(shares[2], 0.01);  // coast
  EXPECT_LE(SlicesSpent(SliceShareRule::kBonferroni, shares, 0.04), 0.04);
}

TEST(SliceCheckTest, NamesEveryBadSliceField) {
  std::vector<FieldViolation> v;
  std::vector<SliceEvidence> slices = {Slice("", 1, 10), Slice("a", 11, 10), Slice("a", 0, 0),
                                       Slice("b\nc", 0, 5), Slice(std::string(200, 'z'), 0, 5)};
  EXPECT_FALSE(CheckSlices(slices, "evidence.slices", &v));
  std::vector<std::string> fields;
  for (const FieldViolation& f : v) fields.push_back(f.field);
  EXPECT_THAT(fields, ::testing::UnorderedElementsAre(
                          "evidence.slices[0].name", "evidence.slices[1].error_count",
                          "evidence.slices[2].name", "evidence.slices[2].sample_count",
                          "evidence.slices[3].name", "evidence.slices[4].name"));
}

TEST(SliceCheckTest, NamesEveryBadSharingField) {
  std::vector<FieldViolation> v;
  SliceSharing sharing;
  sharing.weights = {{"north", 0.5}, {"west", 0.2}, {"north", 0.1}, {"coast", 1.5}};
  EXPECT_FALSE(CheckSliceSharing(sharing, ThreeSlices(), "slice_sharing", &v));
  std::vector<std::string> fields;
  for (const FieldViolation& f : v) fields.push_back(f.field);
  EXPECT_THAT(fields, ::testing::UnorderedElementsAre("slice_sharing.weights[1].slice_name",
                                                      "slice_sharing.weights[2].slice_name",
                                                      "slice_sharing.weights[3].weight"));
  v.clear();
  sharing.weights = {{"north", 0.5}, {"south", 0.5000000000000001}, {"coast", 0.0001}};
  EXPECT_FALSE(CheckSliceSharing(sharing, ThreeSlices(), "slice_sharing", &v));
  ASSERT_EQ(v.size(), 1u);
  EXPECT_EQ(v[0].field, "slice_sharing.weights");
  v.clear();
  sharing.rule = SliceShareRule::kSidak;
  EXPECT_FALSE(CheckSliceSharing(sharing, ThreeSlices(), "slice_sharing", &v));
  v.clear();
  sharing.rule = std::nullopt;
  sharing.weights.clear();
  EXPECT_FALSE(CheckSliceSharing(sharing, ThreeSlices(), "slice_sharing", &v));
  ASSERT_EQ(v.size(), 1u);
  EXPECT_EQ(v[0].field, "slice_sharing.rule");
}

// Certify with slices only: every slice's Clopper-Pearson certificate at
// delta / G, worst first, and the worst-slice statement.
// Source: Boost.Math find_upper/lower_bound_on_p (Clopper-Pearson).
TEST(CertifySlicesTest, SlicesOnlyGetTheWholeDelta) {
  CertifyRequest r;
  r.evidence.slices = ThreeSlices();
  r.failure_probability = 0.06;
  absl::StatusOr<CertifyResult> res = Certify(r);
  ASSERT_TRUE(res.ok()) << res.status();
  EXPECT_TRUE(res->certificates.empty());
  ASSERT_TRUE(res->slices.has_value());
  const SliceSummary& s = *res->slices;
  EXPECT_EQ(s.failure_probability, 0.06);
  ASSERT_EQ(s.slice_certificates.size(), 3u);
  EXPECT_EQ(s.slice_certificates[0].slice_name, "south");  // 40/500 is the worst
  EXPECT_EQ(s.worst_slice_name, "south");
  for (const SliceCertificate& c : s.slice_certificates) {
    const SliceEvidence e = c.slice_name == "north"   ? ThreeSlices()[0]
                            : c.slice_name == "south" ? ThreeSlices()[1]
                                                      : ThreeSlices()[2];
    EXPECT_NEAR(c.certificate.risk_upper_bound, BoostUpper(e.sample_count, e.error_count, 0.02),
                1e-12)
        << c.slice_name;
    EXPECT_GE(c.certificate.risk_upper_bound, BoostUpper(e.sample_count, e.error_count, 0.02));
    EXPECT_NEAR(*c.certificate.risk_lower_bound, BoostLower(e.sample_count, e.error_count, 0.02),
                1e-12);
    // 0.06 / 3 rounded toward zero (delta_split.h).
    EXPECT_LE(c.certificate.failure_probability, 0.02);
    EXPECT_NEAR(c.certificate.failure_probability, 0.02, 1e-17);
  }
  EXPECT_EQ(s.worst_slice_upper_bound, s.slice_certificates[0].certificate.risk_upper_bound);
  EXPECT_GE(s.slice_certificates[1].certificate.risk_upper_bound,
            s.slice_certificates[2].certificate.risk_upper_bound);
  EXPECT_LE(s.spent_failure_probability, 0.06);
  EXPECT_THAT(s.statement, HasSubstr("no slice's true error exceeds"));
  EXPECT_THAT(s.statement, HasSubstr("'south'"));
  EXPECT_THAT(s.statement, HasSubstr("Bonferroni 1936"));
  EXPECT_THAT(absl::StrJoin(res->cautions, " "), HasSubstr("not a fairness audit"));
}

TEST(CertifySlicesTest, WithOtherEvidenceEachPartGetsHalf) {
  CertifyRequest r;
  r.evidence.holdout = SampleCounts{55, 1700};
  r.evidence.slices = ThreeSlices();
  r.failure_probability = 0.05;
  r.slice_sharing.rule = SliceShareRule::kSidak;
  absl::StatusOr<CertifyResult> res = Certify(r);
  ASSERT_TRUE(res.ok()) << res.status();
  ASSERT_EQ(res->certificates.size(), 1u);
  EXPECT_EQ(res->certificates[0].failure_probability, 0.025);
  EXPECT_NEAR(res->certificates[0].risk_upper_bound, BoostUpper(1700, 55, 0.025), 1e-12);
  EXPECT_EQ(res->slices->failure_probability, 0.025);
  EXPECT_EQ(res->slices->rule, SliceShareRule::kSidak);
  // Source: Sidak (1967): 1 - (1 - 0.025)^(1/3).
  const double sidak = 1.0 - std::pow(0.975, 1.0 / 3.0);
  EXPECT_NEAR(res->slices->slice_certificates[0].certificate.failure_probability, sidak,
              1e-9 * sidak);
  EXPECT_LE(res->spent_failure_probability + res->slices->spent_failure_probability, 0.05);
  EXPECT_THAT(res->rule, HasSubstr("half to the slices"));
}

TEST(CertifySlicesTest, RefusesSharingWithoutSlicesAndBadSlices) {
  CertifyRequest r;
  r.evidence.holdout = SampleCounts{5, 100};
  r.slice_sharing.rule = SliceShareRule::kSidak;
  EXPECT_THAT(Certify(r).status(), StatusIs(absl::StatusCode::kInvalidArgument));
  EXPECT_EQ(Fields(Certify(r).status()), "slice_sharing");
  r.slice_sharing = SliceSharing();
  r.evidence.slices = {Slice("a", 3, 2), Slice("a", 1, 2)};
  EXPECT_EQ(Fields(Certify(r).status()), "evidence.slices[0].error_count evidence.slices[1].name");
}

GatePolicy SlicePolicy(double max_slice_risk) {
  GatePolicy p;
  p.max_risk = 0.05;
  p.failure_probability = 0.05;
  p.max_slice_risk = max_slice_risk;
  return p;
}

GateCandidate SliceCandidate(std::vector<SliceEvidence> slices) {
  GateCandidate c;
  c.id = "fern-7";
  std::uint64_t k = 0, n = 0;
  for (const SliceEvidence& s : slices) {
    k += s.error_count;
    n += s.sample_count;
  }
  c.evidence.holdout = SampleCounts{k, n};
  c.evidence.slices = std::move(slices);
  return c;
}

// Without a champion: risk delta/4 each side, slices delta/2 shared by G,
// each slice's upper and lower at half its share.
// Source: Boost.Math find_upper/lower_bound_on_p (Clopper-Pearson).
TEST(SliceGateTest, PromotesWhenEverySliceClears) {
  const GateCandidate c =
      SliceCandidate({Slice("north", 10, 4000), Slice("south", 14, 3000), Slice("coast", 4, 2000)});
  absl::StatusOr<GateDecision> d = DecideGate(SlicePolicy(0.02), c, std::nullopt);
  ASSERT_TRUE(d.ok()) << d.status();
  EXPECT_EQ(d->verdict, Verdict::kPromote) << absl::StrJoin(d->reasons, "\n");
  ASSERT_EQ(d->slices.size(), 3u);
  const double share = 0.025 / 3.0;
  for (const SliceCheck& s : d->slices) {
    EXPECT_EQ(s.outcome, SliceOutcome::kClears);
    EXPECT_NEAR(s.failure_probability, share, 1e-18);
    EXPECT_LE(s.failure_probability, share);
    EXPECT_NEAR(s.risk_upper_bound, BoostUpper(s.sample_count, s.error_count, share / 2), 1e-12);
    EXPECT_NEAR(s.risk_lower_bound, BoostLower(s.sample_count, s.error_count, share / 2), 1e-12);
  }
  EXPECT_NEAR(d->risk_certificate.risk_upper_bound, BoostUpper(9000, 28, 0.0125), 1e-12);
  // Worst first: largest upper bound minus limit.
  EXPECT_EQ(d->slices[0].slice_name, "south");
  ASSERT_EQ(d->delta_ledger.size(), 5u);
  EXPECT_EQ(d->delta_ledger[2].slice_name, "north");
  EXPECT_LE(d->spent_failure_probability, 0.05);
  EXPECT_THAT(d->reasons[0], HasSubstr("every one of the 3 slices clears its limit"));
}

TEST(SliceGateTest, RejectsWhenOneSliceExceedsThoughOverallIsFine) {
  // Overall 55 / 9000 = 0.6%, far below 5%; slice 'coast' has 60 / 600 = 10%.
  const GateCandidate c =
      SliceCandidate({Slice("north", 0, 4400), Slice("south", 0, 4000), Slice("coast", 60, 600)});
  absl::StatusOr<GateDecision> d = DecideGate(SlicePolicy(0.05), c, std::nullopt);
  ASSERT_TRUE(d.ok()) << d.status();
  EXPECT_EQ(d->verdict, Verdict::kReject);
  EXPECT_LE(d->risk_certificate.risk_upper_bound, 0.05);
  EXPECT_EQ(d->slices[0].slice_name, "coast");
  EXPECT_EQ(d->slices[0].outcome, SliceOutcome::kExceeds);
  EXPECT_THAT(d->reasons[0], HasSubstr("slice 'coast' exceeds its limit"));
}

TEST(SliceGateTest, HoldNamesUndecidedSlicesWithPlans) {
  // 'south': 13 / 400 = 3.25% against a 5% limit: not shown either way.
  const GateCandidate c =
      SliceCandidate({Slice("north", 20, 5000), Slice("south", 13, 400), Slice("coast", 2, 3000)});
  GatePolicy p = SlicePolicy(0.05);
  p.slice_max_risks = {{"coast", 0.004}};
  absl::StatusOr<GateDecision> d = DecideGate(p, c, std::nullopt);
  ASSERT_TRUE(d.ok()) << d.status();
  EXPECT_EQ(d->verdict, Verdict::kHold) << absl::StrJoin(d->reasons, "\n");
  int undecided = 0;
  std::uint64_t sum = 0;
  for (const SliceCheck& s : d->slices) {
    if (s.slice_name == "coast") {
      EXPECT_EQ(s.max_risk, 0.004);
    }
    if (s.outcome != SliceOutcome::kUndecided) {
      EXPECT_FALSE(s.additional_sample_count.has_value());
      continue;
    }
    ++undecided;
    ASSERT_TRUE(s.additional_sample_count.has_value()) << s.reason;
    EXPECT_GT(*s.additional_sample_count, 0u);
    sum += *s.additional_sample_count;
    EXPECT_THAT(s.reason, HasSubstr("more labelled hold-out samples from slice"));
    // The plan names the slice's rate once, without a doubled quote
    // ("slice 'x''s observed error rate" read badly).
    EXPECT_THAT(s.reason, HasSubstr("the observed error rate of slice '" + s.slice_name + "'"));
    EXPECT_THAT(s.reason, Not(HasSubstr("''")));
  }
  EXPECT_GE(undecided, 1);
  ASSERT_TRUE(d->additional_sample_count.has_value());
  EXPECT_GE(*d->additional_sample_count, sum);
  EXPECT_THAT(d->reasons[0], HasSubstr("undecided"));
}

// The plan for a slice equals the hold-out planner's answer for the slice's
// own counts at its upper-bound share (the overall planner, plan.h, is
// checked against a scipy brute force in tests/reference).
TEST(SliceGateTest, SlicePlanIsTheHoldoutPlanAtTheSlicesShare) {
  const GateCandidate c = SliceCandidate({Slice("only", 13, 400)});
  absl::StatusOr<GateDecision> d = DecideGate(SlicePolicy(0.05), c, std::nullopt);
  ASSERT_TRUE(d.ok()) << d.status();
  ASSERT_EQ(d->slices.size(), 1u);
  ASSERT_EQ(d->slices[0].outcome, SliceOutcome::kUndecided);
  HoldoutPlanRequest req;
  req.target_risk = 0.05;
  req.expected_risk = 13.0 / 400.0;
  req.failure_probability = 0.025 / 2.0;
  req.pass_probability = kDefaultPlanPassProbability;
  req.held_sample_count = 400;
  absl::StatusOr<HoldoutPlan> h = PlanHoldout(req);
  ASSERT_TRUE(h.ok());
  ASSERT_TRUE(d->slices[0].additional_sample_count.has_value());
  EXPECT_EQ(*d->slices[0].additional_sample_count, h->additional_sample_count);
}

TEST(SliceGateTest, RefusesSlicesWithoutLimitsAndLimitsWithoutSlices) {
  GatePolicy p = SlicePolicy(0.05);
  GateCandidate bare;
  bare.id = "m";
  bare.evidence.holdout = SampleCounts{1, 100};
  EXPECT_EQ(Fields(DecideGate(p, bare, std::nullopt).status()), "candidate.evidence.slices");

  GatePolicy none;
  none.max_risk = 0.05;
  none.failure_probability = 0.05;
  const GateCandidate c = SliceCandidate(ThreeSlices());
  EXPECT_EQ(Fields(DecideGate(none, c, std::nullopt).status()), "policy.max_slice_risk");

  GatePolicy partial = none;
  partial.slice_max_risks = {{"north", 0.1}, {"west", 0.1}, {"north", 0.2}, {"south", 1.5}};
  EXPECT_EQ(Fields(DecideGate(partial, c, std::nullopt).status()),
            "policy.slice_max_risks[2].slice_name policy.slice_max_risks[3].max_risk "
            "policy.slice_max_risks[1].slice_name policy.max_slice_risk");

  GatePolicy bad = SlicePolicy(std::nan(""));
  bad.slice_sharing.rule = std::nullopt;
  EXPECT_EQ(Fields(DecideGate(bad, c, std::nullopt).status()),
            "policy.max_slice_risk policy.slice_sharing.rule");
}

// With a champion and slices: three equal parts (risk, comparison, slices),
// each rounded down; the ledger's total, with Sidak slices combined as a
// product, stays within delta.
TEST(SliceGateTest, ThreePartsWithAChampionAndSidak) {
  const GateCandidate c =
      SliceCandidate({Slice("north", 10, 4000), Slice("south", 14, 3000), Slice("coast", 4, 2000)});
  GatePolicy p = SlicePolicy(0.02);
  p.slice_sharing.rule = SliceShareRule::kSidak;
  ChampionComparison champion;
  champion.champion_id = "fern-6";
  champion.paired = PairedCounts{20, 30, 8, 9000};
  absl::StatusOr<GateDecision> d = DecideGate(p, c, champion);
  ASSERT_TRUE(d.ok()) << d.status();
  const double part = 0.05 / 3.0;
  EXPECT_LE(d->delta_ledger[0].failure_probability, part / 2.0);
  EXPECT_NEAR(d->delta_ledger[0].failure_probability, part / 2.0, 1e-17);
  const double sidak = 1.0 - std::pow(1.0 - part, 1.0 / 3.0);
  EXPECT_NEAR(d->slices[0].failure_probability, sidak, 2e-9 * sidak);
  EXPECT_LE(d->spent_failure_probability, 0.05);
  EXPECT_GT(d->spent_failure_probability, 0.05 * (1 - 1e-6));
}

TEST(SliceGateTest, SequentialSlicesUseAnytimeBounds) {
  const GateCandidate c =
      SliceCandidate({Slice("north", 10, 4000), Slice("south", 14, 3000), Slice("coast", 4, 2000)});
  GatePolicy p = SlicePolicy(0.02);
  p.sequential = true;
  absl::StatusOr<GateDecision> fixed = DecideGate(SlicePolicy(0.02), c, std::nullopt);
  absl::StatusOr<GateDecision> seq = DecideGate(p, c, std::nullopt);
  ASSERT_TRUE(fixed.ok() && seq.ok());
  for (std::size_t i = 0; i < 3; ++i) {
    EXPECT_GT(seq->slices[i].risk_upper_bound, fixed->slices[i].risk_upper_bound);
  }
  EXPECT_THAT(seq->delta_ledger.back().test, HasSubstr("anytime"));
}

}  // namespace
}  // namespace riskbound::core
