// Structural risk minimization (service/core/select.h): the choice on
// structures whose right answer is worked out by hand, the failure-probability
// weights, agreement with Certify, ties, the fragility flag, bad input.
#include "service/core/select.h"

#include <algorithm>
#include <cmath>
#include <map>
#include <numbers>

#include "absl/strings/str_cat.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "service/core/certify.h"
#include "service/core/field_violation.h"
#include "service/core/vc.h"
#include "tests/testing/fixture.h"
#include "tests/testing/status_matchers.h"

namespace riskbound::core {
namespace {

using ::riskbound::testing::Num;
using ::riskbound::testing::ReadFixture;
using ::riskbound::testing::StatusIs;
using ::testing::Contains;
using ::testing::ElementsAre;
using ::testing::HasSubstr;
using ::testing::IsEmpty;
using ::testing::Not;
using ::testing::StartsWith;

StructureCandidate Vc(const std::string& id, std::uint64_t errors, std::uint64_t samples,
                      std::uint64_t h) {
  StructureCandidate c;
  c.id = id;
  c.error_count = errors;
  c.sample_count = samples;
  c.capacity.vc_dimension = h;
  return c;
}

StructureCandidate Finite(const std::string& id, std::uint64_t errors, std::uint64_t samples,
                          double log_h) {
  StructureCandidate c;
  c.id = id;
  c.error_count = errors;
  c.sample_count = samples;
  c.capacity.log_hypothesis_count = log_h;
  return c;
}

// Hand computation (Occam-Hoeffding, Hoeffding 1963 plus a union bound):
// m = 1000, delta = 0.06 over 3 candidates -> delta_k = 0.02, ln(1/0.02) = 3.912.
//   A: ln|H| = 10,  300 errors: 0.30 + sqrt((10  + 3.912)/2000) = 0.383403
//   B: ln|H| = 50,  100 errors: 0.10 + sqrt((50  + 3.912)/2000) = 0.264183
//   C: ln|H| = 200,  90 errors: 0.09 + sqrt((200 + 3.912)/2000) = 0.409306
// ERM (smallest training error) would take C; SRM takes B.
TEST(SelectTest, OccamStructureHandWorked) {
  SelectRequest req;
  req.family = Family::kOccamHoeffding;
  req.failure_probability = 0.06;
  req.delta_spread = DeltaSpread::kUniform;
  req.structure = {Finite("A", 300, 1000, 10), Finite("B", 100, 1000, 50),
                   Finite("C", 90, 1000, 200)};
  auto got = SelectStructure(req);
  ASSERT_TRUE(got.ok()) << got.status();
  ASSERT_EQ(got->candidates.size(), 3u);
  EXPECT_NEAR(got->candidates[0].risk_upper_bound, 0.383403, 1e-6);
  EXPECT_NEAR(got->candidates[1].risk_upper_bound, 0.264183, 1e-6);
  EXPECT_NEAR(got->candidates[2].risk_upper_bound, 0.409306, 1e-6);
  EXPECT_EQ(got->chosen_index, 1u);
  EXPECT_EQ(got->candidates[1].id, "B");
  EXPECT_DOUBLE_EQ(got->candidates[1].capacity, 50.0);
  EXPECT_DOUBLE_EQ(got->candidates[1].empirical_risk, 0.1);
  EXPECT_NEAR(got->candidates[1].penalty, 0.164183, 1e-6);
  for (const CandidateBound& c : got->candidates) EXPECT_DOUBLE_EQ(c.failure_probability, 0.02);
  EXPECT_NEAR(got->spent_failure_probability, 0.06, 1e-15);
  EXPECT_FALSE(got->fragile);
  EXPECT_THAT(got->within_tolerance_ids, IsEmpty());
  EXPECT_THAT(got->delta_rule, HasSubstr("delta/3"));
}

// Hand computation (Vapnik 1998 with the +1/m we implement; SRM weights,
// Shalev-Shwartz & Ben-David 2014 Ch. 7):
// m = 10000, delta = 0.05, w_k = 6/(pi^2 k^2):
//   k=1: h=10,   2500 errors, delta_1 = 0.030396: 0.25 + 0.095336 + 0.0001 = 0.345436
//   k=2: h=100,   500 errors, delta_2 = 0.007599: 0.05 + 0.252210 + 0.0001 = 0.302310
//   k=3: h=1000,  100 errors, delta_3 = 0.003377: 0.01 + 0.632678 + 0.0001 = 0.642778
// with conf_k = sqrt((h (ln(2m/h) + 1) + ln(4/delta_k)) / m). The middle class wins.
TEST(SelectTest, VcStructureInverseSquareHandWorked) {
  SelectRequest req;
  req.family = Family::kVcAdditive;
  req.failure_probability = 0.05;
  req.delta_spread = DeltaSpread::kInverseSquare;
  req.structure = {Vc("h10", 2500, 10000, 10), Vc("h100", 500, 10000, 100),
                   Vc("h1000", 100, 10000, 1000)};
  auto got = SelectStructure(req);
  ASSERT_TRUE(got.ok()) << got.status();
  EXPECT_NEAR(got->candidates[0].risk_upper_bound, 0.345436, 1e-6);
  EXPECT_NEAR(got->candidates[1].risk_upper_bound, 0.302310, 1e-6);
  EXPECT_NEAR(got->candidates[2].risk_upper_bound, 0.642778, 1e-6);
  EXPECT_NEAR(got->candidates[0].failure_probability, 0.030396, 1e-6);
  EXPECT_NEAR(got->candidates[1].failure_probability, 0.007599, 1e-6);
  EXPECT_NEAR(got->candidates[2].failure_probability, 0.003377, 1e-6);
  EXPECT_EQ(got->chosen_index, 1u);
  EXPECT_FALSE(got->fragile);
  EXPECT_LT(got->spent_failure_probability, 0.05);
}

// Source: hand/Python evaluation (sum 1/k^2 = pi^2/6): w_k = 6/(pi^2 k^2) for k = 1..5 are
// 0.6079, 0.1520, 0.0675, 0.0380, 0.0243 (first five sum to 0.8898).
TEST(SelectTest, InverseSquareWeightsWorkedValues) {
  SelectRequest req;
  req.family = Family::kOccamKl;
  req.failure_probability = 0.1;
  req.delta_spread = DeltaSpread::kInverseSquare;
  for (int i = 0; i < 5; ++i) {
    req.structure.push_back(Finite(absl::StrCat("c", i), 10, 500, 2.0 * (i + 1)));
  }
  auto got = SelectStructure(req);
  ASSERT_TRUE(got.ok()) << got.status();
  const double expected[] = {0.6079, 0.1520, 0.0675, 0.0380, 0.0243};
  for (int i = 0; i < 5; ++i) {
    EXPECT_NEAR(got->candidates[i].delta_weight, expected[i], 5e-5) << i;
    EXPECT_NEAR(got->candidates[i].failure_probability, 0.1 * expected[i], 5e-6) << i;
  }
  EXPECT_NEAR(got->candidates[0].delta_weight, 6.0 / (std::numbers::pi * std::numbers::pi), 1e-15);
  EXPECT_NEAR(got->spent_failure_probability, 0.1 * 0.8898, 5e-6);
  EXPECT_THAT(got->delta_rule, HasSubstr("6/(pi^2 k^2)"));
}

// Every candidate's bound is the registered family's bound at delta_k: the
// same number a Certify call gives with that family listed and weight w_k
// (Certify computes it at delta * w_k). Checked for the four training-set
// families, every candidate and every spread.
TEST(SelectTest, EveryBoundEqualsCertifyAtItsShare) {
  const Family families[] = {Family::kVcAdditive, Family::kVcRelative,
                             Family::kOccamHoeffding, Family::kOccamKl};
  const DeltaSpread spreads[] = {DeltaSpread::kUniform, DeltaSpread::kInverseSquare,
                                 DeltaSpread::kCallerWeights};
  for (Family family : families) {
    for (DeltaSpread spread : spreads) {
      SelectRequest req;
      req.family = family;
      req.failure_probability = 0.05;
      req.delta_spread = spread;
      if (spread == DeltaSpread::kCallerWeights) req.weights = {0.5, 0.25, 0.125, 0.125};
      for (int i = 0; i < 4; ++i) {
        StructureCandidate c = Vc(absl::StrCat("k", i), 400 - 80 * i, 5000, 5 * (i + 1) * (i + 1));
        c.capacity.log_hypothesis_count = 3.0 * (i + 1) * (i + 1);
        req.structure.push_back(c);
      }
      auto got = SelectStructure(req);
      ASSERT_TRUE(got.ok()) << got.status();
      for (std::size_t i = 0; i < req.structure.size(); ++i) {
        CertifyRequest cert;
        cert.evidence.training = TrainingEvidence{req.structure[i], req.structure[i].capacity};
        cert.failure_probability = req.failure_probability;
        cert.family_choice = FamilyChoice::kListed;
        cert.listed.families = {family};
        cert.listed.delta_weights = {got->candidates[i].delta_weight};
        auto c = Certify(cert);
        ASSERT_TRUE(c.ok()) << c.status();
        EXPECT_EQ(got->candidates[i].risk_upper_bound, c->certificates[0].risk_upper_bound)
            << static_cast<int>(family) << " candidate " << i;
        EXPECT_EQ(got->candidates[i].failure_probability, c->certificates[0].failure_probability);
        EXPECT_EQ(got->candidates[i].penalty, c->certificates[0].penalty);
        // The chosen bound is the smallest.
        EXPECT_LE(got->candidates[got->chosen_index].risk_upper_bound,
                  got->candidates[i].risk_upper_bound);
      }
      if (spread == DeltaSpread::kCallerWeights) {
        EXPECT_DOUBLE_EQ(got->candidates[1].failure_probability, 0.05 * 0.25);
        EXPECT_DOUBLE_EQ(got->spent_failure_probability, 0.05);
      }
    }
  }
}

// Equal bounds (the same class listed twice at equal weights) go to the
// earlier, smaller-capacity candidate, and the choice is flagged fragile.
TEST(SelectTest, TiesGoToSmallerCapacity) {
  SelectRequest req;
  req.family = Family::kVcRelative;
  req.delta_spread = DeltaSpread::kUniform;
  req.structure = {Vc("a", 50, 20000, 20), Vc("b", 50, 20000, 20), Vc("c", 50, 20000, 40)};
  auto got = SelectStructure(req);
  ASSERT_TRUE(got.ok()) << got.status();
  EXPECT_EQ(got->candidates[0].risk_upper_bound, got->candidates[1].risk_upper_bound);
  EXPECT_EQ(got->chosen_index, 0u);
  EXPECT_TRUE(got->fragile);
  EXPECT_THAT(got->within_tolerance_ids, ::testing::Contains("b"));
}

// Fragility: the flag follows the absolute tolerance on the bound. From the
// hand-worked Occam structure above the runner-up (A, 0.383403) is 0.119220
// above the chosen B (0.264183).
TEST(SelectTest, FragileFlagFollowsTolerance) {
  SelectRequest req;
  req.family = Family::kOccamHoeffding;
  req.failure_probability = 0.06;
  req.delta_spread = DeltaSpread::kUniform;
  req.structure = {Finite("A", 300, 1000, 10), Finite("B", 100, 1000, 50),
                   Finite("C", 90, 1000, 200)};
  req.fragility_tolerance = 0.119;
  auto got = SelectStructure(req);
  ASSERT_TRUE(got.ok());
  EXPECT_FALSE(got->fragile);
  req.fragility_tolerance = 0.1193;
  got = SelectStructure(req);
  ASSERT_TRUE(got.ok());
  EXPECT_TRUE(got->fragile);
  EXPECT_THAT(got->within_tolerance_ids, ElementsAre("A"));
  req.fragility_tolerance = 0.2;  // C is 0.145123 above B
  got = SelectStructure(req);
  EXPECT_THAT(got->within_tolerance_ids, ElementsAre("A", "C"));
  EXPECT_EQ(got->chosen_index, 1u);
}

TEST(SelectTest, AllVacuousSaysSo) {
  SelectRequest req;
  req.family = Family::kVcAdditive;
  req.structure = {Vc("a", 10, 100, 500), Vc("b", 0, 100, 1000)};
  auto got = SelectStructure(req);
  ASSERT_TRUE(got.ok()) << got.status();
  EXPECT_TRUE(got->candidates[0].vacuous);
  EXPECT_TRUE(got->candidates[1].vacuous);
  EXPECT_EQ(got->chosen_index, 0u);
  ASSERT_FALSE(got->notes.empty());
  EXPECT_THAT(got->notes[0], HasSubstr("vacuous"));
  for (const CandidateBound& c : got->candidates) {
    EXPECT_TRUE(std::isfinite(c.risk_upper_bound));
    EXPECT_TRUE(std::isfinite(c.penalty));
  }
}

std::vector<std::string> Fields(const absl::Status& status) {
  std::vector<std::string> out;
  for (const FieldViolation& v : FieldViolationsOf(status)) out.push_back(v.field);
  return out;
}

TEST(SelectTest, InvalidInputNamesTheField) {
  SelectRequest req;
  req.family = Family::kVcAdditive;
  EXPECT_THAT(SelectStructure(req),
              StatusIs(absl::StatusCode::kInvalidArgument, HasSubstr("structure")));

  // Empty and duplicate ids, bad counts, a missing capacity.
  req.structure = {Vc("", 1, 10, 1), Vc("x", 11, 10, 2), Vc("x", 0, 0, 3), Finite("y", 0, 10, 1.0)};
  auto got = SelectStructure(req);
  EXPECT_THAT(got, StatusIs(absl::StatusCode::kInvalidArgument));
  EXPECT_THAT(Fields(got.status()),
              ElementsAre("structure[0].id", "structure[1].error_count", "structure[2].id",
                          "structure[2].sample_count", "structure[3].capacity"));

  // Not nested.
  req.structure = {Vc("a", 1, 100, 10), Vc("b", 1, 100, 5)};
  got = SelectStructure(req);
  EXPECT_THAT(got, StatusIs(absl::StatusCode::kInvalidArgument, HasSubstr("nested")));
  EXPECT_THAT(Fields(got.status()), ElementsAre("structure[1].capacity.vc_dimension"));

  // A bad ln|H| for a finite-class family.
  req.family = Family::kOccamKl;
  req.structure = {Finite("a", 1, 100, -1.0), Finite("b", 1, 100, NAN)};
  EXPECT_THAT(Fields(SelectStructure(req).status()),
              ElementsAre("structure[0].capacity.log_hypothesis_count",
                          "structure[1].capacity.log_hypothesis_count"));

  // Hold-out family, delta, tolerance.
  req = SelectRequest{};
  req.structure = {Vc("a", 1, 100, 10)};
  req.family = Family::kHoldoutExactBinomial;
  req.failure_probability = 1.0;
  req.fragility_tolerance = -0.1;
  got = SelectStructure(req);
  EXPECT_THAT(got, StatusIs(absl::StatusCode::kInvalidArgument,
                            HasSubstr("not a training-set family")));
  EXPECT_THAT(Fields(got.status()),
              ElementsAre("failure_probability", "fragility_tolerance", "family"));
  // Unset (the API's unspecified, or a value the server does not know).
  req.family = std::nullopt;
  req.failure_probability = 0.05;
  req.fragility_tolerance = 0.0;
  EXPECT_THAT(Fields(SelectStructure(req).status()), ElementsAre("family"));

  // Weights.
  req = SelectRequest{};
  req.family = Family::kVcAdditive;
  req.structure = {Vc("a", 1, 100, 10), Vc("b", 1, 100, 20)};
  req.delta_spread = DeltaSpread::kCallerWeights;
  req.weights = {0.5};
  EXPECT_THAT(Fields(SelectStructure(req).status()), ElementsAre("weights"));
  req.weights = {0.0, 1.5};
  EXPECT_THAT(Fields(SelectStructure(req).status()),
              ElementsAre("weights[0]", "weights[1]", "weights"));
  req.weights = {0.7, 0.4};
  EXPECT_THAT(SelectStructure(req),
              StatusIs(absl::StatusCode::kInvalidArgument, HasSubstr("sum to at most 1")));
  req.weights = {0.6, 0.4};
  EXPECT_TRUE(SelectStructure(req).ok());
  req.delta_spread = DeltaSpread::kUniform;
  EXPECT_THAT(Fields(SelectStructure(req).status()), ElementsAre("weights"));
}

// Heuristic mode: candidates that carry a fitted effective VC dimension.
StructureCandidate Fitted(const std::string& id, std::uint64_t errors, std::uint64_t samples,
                          double h_hat) {
  StructureCandidate c;
  c.id = id;
  c.error_count = errors;
  c.sample_count = samples;
  c.effective_vc_dimension = h_hat;
  return c;
}

// Source: Python recomputation of the VC formulas with a real h
// (tests/reference/fixtures_select.py: Vapnik 1995 ch. 3 and Vapnik 1998
// ch. 4, plain Python floating point): every score, every share and the whole
// ranking (increasing score, ties to the earlier candidate) agree, for both
// VC families and two spreads.
TEST(SelectHeuristicTest, RankingMatchesPythonRecomputation) {
  const auto rows = ReadFixture("select_heuristic.csv");
  std::map<std::string, std::vector<riskbound::testing::FixtureRow>> cases;
  for (const auto& row : rows) cases[row.at("case")].push_back(row);
  ASSERT_EQ(cases.size(), 3u);
  for (const auto& [name, cands] : cases) {
    SelectRequest req;
    req.heuristic = true;
    req.family = cands[0].at("family") == "vc-relative" ? Family::kVcRelative : Family::kVcAdditive;
    req.delta_spread =
        cands[0].at("spread") == "uniform" ? DeltaSpread::kUniform : DeltaSpread::kInverseSquare;
    req.failure_probability = Num(cands[0], "failure_probability");
    for (const auto& row : cands) {
      req.structure.push_back(Fitted(row.at("id"),
                                     static_cast<std::uint64_t>(Num(row, "error_count")),
                                     static_cast<std::uint64_t>(Num(row, "sample_count")),
                                     Num(row, "effective_vc_dimension")));
    }
    auto got = SelectStructure(req);
    ASSERT_TRUE(got.ok()) << name << ": " << got.status();
    EXPECT_TRUE(got->heuristic);
    EXPECT_EQ(got->capacity_measure, "effective_vc_dimension");
    ASSERT_EQ(got->candidates.size(), cands.size());
    std::vector<std::size_t> order(cands.size());
    for (std::size_t i = 0; i < order.size(); ++i) order[i] = i;
    std::stable_sort(order.begin(), order.end(), [&](std::size_t a, std::size_t b) {
      return got->candidates[a].risk_upper_bound < got->candidates[b].risk_upper_bound;
    });
    for (std::size_t i = 0; i < cands.size(); ++i) {
      const CandidateBound& c = got->candidates[i];
      EXPECT_NEAR(c.failure_probability, Num(cands[i], "share"), 1e-15) << name << " " << i;
      EXPECT_NEAR(c.risk_upper_bound, Num(cands[i], "score"), 1e-12) << name << " " << i;
      EXPECT_DOUBLE_EQ(c.capacity, Num(cands[i], "effective_vc_dimension"));
      EXPECT_EQ(order[static_cast<std::size_t>(Num(cands[i], "rank"))], i) << name;
      if (Num(cands[i], "chosen") == 1.0) {
        EXPECT_EQ(got->chosen_index, i) << name;
      }
    }
  }
}

// The label: the first note, the delta rule and every row say it is no bound;
// a structure whose h_hat decreases is noted, not refused; near ties are
// still flagged (the relative case of the fixture: 0.35675 and 0.35753).
TEST(SelectHeuristicTest, AnswerIsLabelledHeuristic) {
  SelectRequest req;
  req.heuristic = true;
  req.family = Family::kVcRelative;
  req.structure = {Fitted("depth-1", 420, 2000, 3.1), Fitted("depth-2", 300, 2000, 7.4),
                   Fitted("depth-3", 240, 2000, 15.2), Fitted("depth-4", 214, 2000, 13.9)};
  auto got = SelectStructure(req);
  ASSERT_TRUE(got.ok()) << got.status();
  EXPECT_TRUE(got->heuristic);
  ASSERT_GE(got->notes.size(), 2u);
  EXPECT_THAT(got->notes[0], StartsWith("HEURISTIC, NOT A BOUND"));
  EXPECT_THAT(got->notes[0], HasSubstr("Vapnik, Levin & LeCun 1994"));
  EXPECT_THAT(got->notes[1], HasSubstr("structure[3].effective_vc_dimension 13.9 is below"));
  EXPECT_THAT(got->delta_rule, HasSubstr("no union bound is claimed"));
  EXPECT_THAT(got->delta_rule, Not(HasSubstr("holds with probability")));
  for (const CandidateBound& c : got->candidates) {
    EXPECT_THAT(c.notes, Contains(HasSubstr("heuristic score, not a bound")));
  }
  EXPECT_EQ(got->chosen_id, "depth-1");
  EXPECT_TRUE(got->fragile);
  EXPECT_THAT(got->within_tolerance_ids, ElementsAre("depth-2"));
  // The same structure certified with integer capacities is not heuristic.
  SelectRequest certified;
  certified.family = Family::kVcRelative;
  certified.structure = {Vc("a", 420, 2000, 3), Vc("b", 300, 2000, 7)};
  auto plain = SelectStructure(certified);
  ASSERT_TRUE(plain.ok()) << plain.status();
  EXPECT_FALSE(plain->heuristic);
  EXPECT_EQ(plain->capacity_measure, "vc_dimension");
}

// With an integer h_hat the score is exactly the VC family's bound at the
// same share (the formula is the same; only its reading differs).
TEST(SelectHeuristicTest, IntegerHhatScoresEqualTheVcBound) {
  for (Family family : {Family::kVcAdditive, Family::kVcRelative}) {
    SelectRequest req;
    req.heuristic = true;
    req.family = family;
    req.delta_spread = DeltaSpread::kUniform;
    req.structure = {Fitted("a", 400, 5000, 5), Fitted("b", 320, 5000, 20),
                     Fitted("c", 240, 5000, 45)};
    auto got = SelectStructure(req);
    ASSERT_TRUE(got.ok()) << got.status();
    for (std::size_t i = 0; i < 3; ++i) {
      const CandidateBound& row = got->candidates[i];
      const auto h = static_cast<std::uint64_t>(*req.structure[i].effective_vc_dimension);
      const Certificate want = family == Family::kVcAdditive
                                   ? VcAdditive(req.structure[i], h, row.failure_probability)
                                   : VcRelative(req.structure[i], h, row.failure_probability);
      EXPECT_EQ(row.risk_upper_bound, want.risk_upper_bound);
      EXPECT_EQ(row.penalty, want.penalty);
    }
  }
}

TEST(SelectHeuristicTest, InvalidInputNamesTheField) {
  // An effective VC dimension without heuristic mode: refused, naming it.
  SelectRequest req;
  req.family = Family::kVcAdditive;
  StructureCandidate both = Vc("b", 1, 100, 10);
  both.effective_vc_dimension = 7.5;
  req.structure = {Vc("a", 1, 100, 5), both};
  auto got = SelectStructure(req);
  EXPECT_THAT(
      got, StatusIs(absl::StatusCode::kInvalidArgument, HasSubstr("set heuristic to rank by it")));
  EXPECT_THAT(Fields(got.status()), ElementsAre("structure[1].effective_vc_dimension"));

  // Heuristic mode: a capacity given, h_hat missing, not finite, <= 0.
  req.heuristic = true;
  StructureCandidate missing = Fitted("c", 1, 100, 1.0);
  missing.effective_vc_dimension.reset();
  req.structure = {both,
                   missing,
                   Fitted("d", 1, 100, NAN),
                   Fitted("e", 1, 100, 0.0),
                   Fitted("f", 1, 100, -2.0),
                   Fitted("g", 1, 100, INFINITY),
                   Fitted("ok", 1, 100, 40.0)};
  got = SelectStructure(req);
  EXPECT_THAT(
      Fields(got.status()),
      ElementsAre("structure[0].capacity", "structure[1].effective_vc_dimension",
                  "structure[2].effective_vc_dimension", "structure[3].effective_vc_dimension",
                  "structure[4].effective_vc_dimension", "structure[5].effective_vc_dimension"));

  // Heuristic mode with a family that does not take a VC dimension.
  for (Family f : {Family::kOccamHoeffding, Family::kOccamKl, Family::kHoldoutExactBinomial}) {
    req.family = f;
    req.structure = {Fitted("a", 1, 100, 2.5)};
    got = SelectStructure(req);
    EXPECT_THAT(got, StatusIs(absl::StatusCode::kInvalidArgument, HasSubstr("VC family")));
    EXPECT_THAT(Fields(got.status()), ElementsAre("family"));
  }
  req.family = std::nullopt;
  EXPECT_THAT(Fields(SelectStructure(req).status()), ElementsAre("family"));
  // Everything else is checked as in a certified selection.
  req.family = Family::kVcAdditive;
  req.structure = {Fitted("a", 5, 4, 2.5)};
  EXPECT_THAT(Fields(SelectStructure(req).status()), ElementsAre("structure[0].error_count"));
  req.structure = {Fitted("a", 1, 4, 2.5)};
  EXPECT_TRUE(SelectStructure(req).ok());
}

}  // namespace
}  // namespace riskbound::core
