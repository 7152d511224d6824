#include "service/core/certify.h"

#include <cmath>

#include "absl/strings/match.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "service/core/families.h"
#include "service/core/holdout.h"
#include "tests/testing/status_matchers.h"

namespace riskbound::core {
namespace {

using ::riskbound::testing::StatusIs;
using ::testing::AllOf;
using ::testing::HasSubstr;

Evidence HoldoutOnly(std::uint64_t errors, std::uint64_t samples) {
  Evidence e;
  e.holdout = SampleCounts{errors, samples};
  return e;
}

Evidence Full() {
  Evidence e = HoldoutOnly(20, 1000);
  TrainingEvidence t;
  t.error_count = 500;
  t.sample_count = 10000;
  t.capacity.vc_dimension = 100;
  t.capacity.log_hypothesis_count = std::log(1e6);
  e.training = t;
  return e;
}

TEST(CertifyTest, RecommendedHoldoutGetsWholeDelta) {
  CertifyRequest req;
  req.evidence = HoldoutOnly(0, 300);
  req.failure_probability = 0.05;
  auto got = Certify(req);
  ASSERT_TRUE(got.ok()) << got.status();
  ASSERT_EQ(got->certificates.size(), 1u);
  EXPECT_EQ(got->certificates[0].family, Family::kHoldoutExactBinomial);
  EXPECT_NEAR(got->certificates[0].risk_upper_bound, 0.009936, 5e-7);  // rule of three
  EXPECT_EQ(got->spent_failure_probability, 0.05);
  EXPECT_THAT(got->rule, HasSubstr("full failure probability"));
}

TEST(CertifyTest, RecommendedTrainingFamilies) {
  CertifyRequest req;
  req.evidence = Full();
  req.evidence.holdout.reset();
  EXPECT_EQ(Certify(req)->certificates[0].family, Family::kOccamKl);
  req.evidence.training->capacity.log_hypothesis_count.reset();
  EXPECT_EQ(Certify(req)->certificates[0].family, Family::kVcAdditive);
}

// Union bound (Bonferroni; common practice): with K families each is
// computed at delta/K and equals a standalone computation at delta/K.
TEST(CertifyTest, AllApplicableSplitsDelta) {
  CertifyRequest req;
  req.evidence = Full();
  req.failure_probability = 0.06;
  req.family_choice = FamilyChoice::kAllApplicable;
  auto got = Certify(req);
  ASSERT_TRUE(got.ok()) << got.status();
  // Hold-out and training evidence: the 7 hold-out, VC and Occam families apply.
  ASSERT_EQ(got->certificates.size(), 7u);
  for (const Certificate& c : got->certificates) {
    EXPECT_DOUBLE_EQ(c.failure_probability, 0.06 / 7);
  }
  EXPECT_NEAR(got->spent_failure_probability, 0.06, 1e-15);
  const Certificate& tight = got->certificates[got->tightest_index];
  EXPECT_EQ(tight.family, Family::kHoldoutExactBinomial);
  EXPECT_DOUBLE_EQ(tight.risk_upper_bound, HoldoutExactBinomial({20, 1000}, 0.06 / 7).risk_upper_bound);
  for (const Certificate& c : got->certificates) EXPECT_GE(c.risk_upper_bound, tight.risk_upper_bound);
  EXPECT_THAT(got->rule, HasSubstr("union bound over 7 families"));
}

TEST(CertifyTest, ListedWithWeights) {
  CertifyRequest req;
  req.evidence = HoldoutOnly(20, 1000);
  req.failure_probability = 0.05;
  req.family_choice = FamilyChoice::kListed;
  req.listed.families = {Family::kHoldoutKlChernoff, Family::kHoldoutExactBinomial};
  req.listed.delta_weights = {0.25, 0.75};
  auto got = Certify(req);
  ASSERT_TRUE(got.ok()) << got.status();
  EXPECT_DOUBLE_EQ(got->certificates[0].failure_probability, 0.0125);
  EXPECT_DOUBLE_EQ(got->certificates[1].failure_probability, 0.0375);
  EXPECT_EQ(got->tightest_index, 1u);
  // 0.2 and 0.8 are not doubles: the doubles nearest them sum to
  // 1 + 2^-54 (Source: exact binary expansion, Python fractions.Fraction(0.2)
  // + Fraction(0.8) - 1 = 1/18014398509481984), which would overspend delta:
  // refused, naming the field, with a last weight that fits.
  req.listed.delta_weights = {0.2, 0.8};
  got = Certify(req);
  EXPECT_THAT(got, StatusIs(absl::StatusCode::kInvalidArgument,
                            HasSubstr("listed.delta_weights[1] = 0.79999999999999993")));
  req.listed.delta_weights = {0.5, 0.5000000000000001};
  got = Certify(req);
  EXPECT_THAT(got, StatusIs(absl::StatusCode::kInvalidArgument,
                            HasSubstr("listed.delta_weights: weights must sum to at most 1")));
}

TEST(CertifyTest, BaselineMakesCertificateVacuous) {
  CertifyRequest req;
  req.evidence = HoldoutOnly(40, 100);
  req.evidence.baseline_error_rate = 0.45;
  auto got = Certify(req);
  ASSERT_TRUE(got.ok());
  EXPECT_GT(got->certificates[0].risk_upper_bound, 0.45);
  EXPECT_TRUE(got->certificates[0].vacuous);
}

TEST(CertifyTest, InvalidInputNamesEveryField) {
  CertifyRequest req;
  req.evidence = HoldoutOnly(5, 3);
  req.failure_probability = 2.0;
  auto got = Certify(req);
  EXPECT_THAT(got, StatusIs(absl::StatusCode::kInvalidArgument,
                            AllOf(HasSubstr("failure_probability"),
                                  HasSubstr("evidence.holdout.error_count"))));
  const auto violations = FieldViolationsOf(got.status());
  ASSERT_EQ(violations.size(), 2u);
  EXPECT_EQ(violations[0].field, "failure_probability");
  EXPECT_EQ(violations[1].field, "evidence.holdout.error_count");

  req = CertifyRequest{};
  req.failure_probability = NAN;
  EXPECT_THAT(Certify(req), StatusIs(absl::StatusCode::kInvalidArgument,
                                     AllOf(HasSubstr("NaN"), HasSubstr("evidence"))));
  req = CertifyRequest{};
  req.evidence = HoldoutOnly(0, 0);
  EXPECT_THAT(Certify(req), StatusIs(absl::StatusCode::kInvalidArgument,
                                     HasSubstr("evidence.holdout.sample_count")));
  req.evidence = HoldoutOnly(0, (1ULL << 53) + 1);
  EXPECT_THAT(Certify(req), StatusIs(absl::StatusCode::kInvalidArgument,
                                     HasSubstr("evidence.holdout.sample_count")));
}

TEST(CertifyTest, TrainingWithoutCapacityOrBadCapacity) {
  CertifyRequest req;
  req.evidence.training = TrainingEvidence{{1, 10}, {}};
  EXPECT_THAT(Certify(req), StatusIs(absl::StatusCode::kInvalidArgument,
                                     HasSubstr("evidence.training.capacity")));
  req.evidence.training->capacity.log_hypothesis_count = -1.0;
  EXPECT_THAT(Certify(req),
              StatusIs(absl::StatusCode::kInvalidArgument,
                       HasSubstr("evidence.training.capacity.log_hypothesis_count")));
  req.evidence.training->capacity.log_hypothesis_count = INFINITY;
  EXPECT_THAT(Certify(req), StatusIs(absl::StatusCode::kInvalidArgument, HasSubstr("+Inf")));
}

TEST(CertifyTest, ListedFamilyProblems) {
  CertifyRequest req;
  req.evidence = HoldoutOnly(1, 100);
  req.family_choice = FamilyChoice::kListed;
  EXPECT_THAT(Certify(req), StatusIs(absl::StatusCode::kInvalidArgument,
                                     HasSubstr("listed.families")));
  req.listed.families = {Family::kHoldoutHoeffding, Family::kHoldoutHoeffding};
  EXPECT_THAT(Certify(req), StatusIs(absl::StatusCode::kInvalidArgument,
                                     HasSubstr("listed.families[1]: holdout-hoeffding is listed twice")));
  req.listed.families = {Family::kVcAdditive};
  EXPECT_THAT(Certify(req), StatusIs(absl::StatusCode::kInvalidArgument,
                                     HasSubstr("listed.families[0]: vc-additive needs")));
  req.listed.families = {std::nullopt};  // unset, or unknown on the wire
  EXPECT_THAT(Certify(req), StatusIs(absl::StatusCode::kInvalidArgument,
                                     HasSubstr("unknown bound family")));
  req.listed.families = {Family::kHoldoutHoeffding, Family::kHoldoutKlChernoff};
  req.listed.delta_weights = {0.7, 0.7};
  EXPECT_THAT(Certify(req), StatusIs(absl::StatusCode::kInvalidArgument,
                                     HasSubstr("sum to at most 1")));
  req.listed.delta_weights = {0.5};
  EXPECT_THAT(Certify(req), StatusIs(absl::StatusCode::kInvalidArgument,
                                     HasSubstr("one weight per listed family")));
  req.listed.delta_weights = {0.5, NAN};
  EXPECT_THAT(Certify(req), StatusIs(absl::StatusCode::kInvalidArgument,
                                     HasSubstr("listed.delta_weights[1]")));
}

// The core checks the whole request before it computes: a bad failure
// probability does not hide a duplicated family, and a model description
// inside the evidence is named at its API path (the core's path is the
// wire's).
TEST(CertifyTest, EveryBadFieldAtOnceAtItsApiPath) {
  CertifyRequest req;
  req.evidence = HoldoutOnly(1, 100);
  TrainingEvidence t;
  t.error_count = 1;
  t.sample_count = 100;
  t.capacity.model = ModelDescription{};
  t.capacity.model->kind = ModelKind::kDecisionTree;  // leaf_count and feature_count missing
  req.evidence.training = t;
  req.failure_probability = 2.0;
  req.family_choice = FamilyChoice::kListed;
  req.listed.families = {Family::kHoldoutHoeffding, Family::kHoldoutHoeffding};
  std::vector<std::string> fields;
  for (const FieldViolation& v : FieldViolationsOf(Certify(req).status())) {
    fields.push_back(v.field);
  }
  EXPECT_THAT(fields, ::testing::ElementsAre("failure_probability",
                                             "evidence.training.capacity.model.leaf_count",
                                             "evidence.training.capacity.model.feature_count",
                                             "listed.families[1]"));
  EXPECT_EQ(ValidateCertifyRequest(req).message(), Certify(req).status().message());
}

// A model description is resolved by the core, with a note that names the
// kind in words and the catalogue's published source.
TEST(CertifyTest, ModelCapacityResolvedWithItsProvenance) {
  CertifyRequest req;
  TrainingEvidence t;
  t.error_count = 10;
  t.sample_count = 10000;
  t.capacity.model = ModelDescription{};
  t.capacity.model->kind = ModelKind::kHalfspace;
  t.capacity.model->dimension = 20;
  req.evidence.training = t;
  req.failure_probability = 0.05;
  auto got = Certify(req);
  ASSERT_TRUE(got.ok()) << got.status();
  ASSERT_EQ(got->certificates.size(), 1u);
  EXPECT_EQ(got->certificates[0].family, Family::kVcAdditive);
  // Source: Cover (1965): halfspaces with a bias in R^20 have VC dimension 21.
  TrainingEvidence explicit_h = t;
  explicit_h.capacity = ClassCapacity{};
  explicit_h.capacity.vc_dimension = 21;
  Evidence e;
  e.training = explicit_h;
  EXPECT_EQ(got->certificates[0].risk_upper_bound,
            FindFamily(Family::kVcAdditive)->compute(e, 0.05).risk_upper_bound);
  bool noted = false;
  for (const std::string& note : got->certificates[0].notes) {
    noted |= absl::StrContains(note, "VC dimension h = 21 (exact)") &&
             absl::StrContains(note, "model kind: halfspace") &&
             absl::StrContains(note, "Cover (1965)");
  }
  EXPECT_TRUE(noted);
}

TEST(FamiliesTest, RegistryIsConsistent) {
  for (const FamilySpec& spec : Families()) {
    EXPECT_EQ(FindFamily(spec.family), &spec);
    EXPECT_EQ(FindFamilyByName(spec.family_name), &spec);
    EXPECT_FALSE(spec.source.empty());
    EXPECT_FALSE(spec.assumptions.empty());
  }
  EXPECT_EQ(FindFamilyByName("no-such-family"), nullptr);
}

TEST(CautionsTest, MentionIidShiftAndReview) {
  const auto& c = Cautions();
  ASSERT_EQ(c.size(), 3u);
  EXPECT_THAT(c[0], HasSubstr("independent draws"));
  EXPECT_THAT(c[1], HasSubstr("distribution shift"));
  EXPECT_THAT(c[2], HasSubstr("model-risk review"));
}

}  // namespace
}  // namespace riskbound::core
