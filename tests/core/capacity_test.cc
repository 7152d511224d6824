// Capacity catalogue: every family against a published value or the published
// formula evaluated independently in Python with exact integers, an
// independent computation
// in the test (Boost.Math binomial coefficients, exact integer arithmetic,
// monomial enumeration), and the error contract.
#include "service/core/capacity.h"

#include <cmath>
#include <cstdint>
#include <numbers>
#include <string>
#include <vector>

#include <boost/math/special_functions/binomial.hpp>

#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "service/core/field_violation.h"
#include "service/core/vc.h"
#include "tests/testing/status_matchers.h"

namespace riskbound::core {
namespace {

using ::riskbound::testing::StatusIs;
using ::testing::Contains;
using ::testing::HasSubstr;

ModelDescription Model(ModelKind kind) {
  ModelDescription m;
  m.kind = kind;
  return m;
}

CapacityEstimate Ok(const ModelDescription& m) {
  absl::StatusOr<CapacityEstimate> e = EstimateCapacity(m);
  EXPECT_TRUE(e.ok()) << e.status();
  return e.ok() ? *e : CapacityEstimate{};
}

// The field paths of an INVALID_ARGUMENT answer.
std::vector<std::string> BadFields(const ModelDescription& m) {
  absl::StatusOr<CapacityEstimate> e = EstimateCapacity(m);
  EXPECT_THAT(e, StatusIs(absl::StatusCode::kInvalidArgument));
  std::vector<std::string> fields;
  for (const FieldViolation& v : FieldViolationsOf(e.status())) fields.push_back(v.field);
  return fields;
}

bool AnyNoteHas(const CapacityEstimate& e, const std::string& text) {
  for (const std::string& n : e.notes) {
    if (n.find(text) != std::string::npos) return true;
  }
  return false;
}

// Source: d = 10: 11 with bias, 10 homogeneous; Cover
// (1965); Shalev-Shwartz & Ben-David (2014) Thms 9.2-9.3.
TEST(CapacityTest, HalfspacesDPlusOne) {
  ModelDescription m = Model(ModelKind::kHalfspace);
  m.dimension = 10;
  CapacityEstimate e = Ok(m);
  EXPECT_EQ(e.vc_dimension, 11.0);
  EXPECT_EQ(e.status, CapacityStatus::kExact);
  EXPECT_EQ(e.vc_dimension_lower_bound, 11.0);
  EXPECT_FALSE(e.exceeds_uint64);
  EXPECT_THAT(e.source, HasSubstr("Cover (1965)"));
  m.with_bias = false;
  EXPECT_EQ(Ok(m).vc_dimension, 10.0);
  m.with_bias = true;
  m.dimension = 2;
  EXPECT_EQ(Ok(m).vc_dimension, 3.0);  // the plane: 3 (brute force in shattering_test)
}

// Source: Dudley (1978) / Wenocur & Dudley (1981); Anthony & Bartlett (1999)
// Thm 3.5 (from memory): the number of monomials, d = 10, p = 3 gives
// C(13, 3) = 286 (Python math.comb).
TEST(CapacityTest, PolynomialThresholdWorkedValue) {
  ModelDescription m = Model(ModelKind::kPolynomialThreshold);
  m.dimension = 10;
  m.degree = 3;
  CapacityEstimate e = Ok(m);
  EXPECT_EQ(e.vc_dimension, 286.0);
  EXPECT_EQ(e.status, CapacityStatus::kExact);
  m.with_bias = false;
  EXPECT_EQ(Ok(m).vc_dimension, 285.0);  // no constant monomial
}

// Source: brute-force enumeration of the exponent vectors (a_1..a_d) with
// a_1 + ... + a_d <= p: the number of monomials, incl. the constant.
TEST(CapacityTest, PolynomialThresholdCountsMonomials) {
  for (std::uint64_t d = 1; d <= 4; ++d) {
    for (std::uint64_t p = 1; p <= 5; ++p) {
      std::uint64_t count = 0;
      std::vector<std::uint64_t> a(d, 0);
      // Odometer over {0..p}^d, counting vectors of total degree <= p.
      while (true) {
        std::uint64_t sum = 0;
        for (std::uint64_t x : a) sum += x;
        if (sum <= p) ++count;
        std::size_t i = 0;
        while (i < d && a[i] == p) a[i++] = 0;
        if (i == d) break;
        ++a[i];
      }
      ModelDescription m = Model(ModelKind::kPolynomialThreshold);
      m.dimension = d;
      m.degree = p;
      EXPECT_EQ(Ok(m).vc_dimension, static_cast<double>(count)) << "d=" << d << " p=" << p;
    }
  }
}

// Source: Boost.Math binomial_coefficient<double>. C(1020, 20) = 5.06e41 is
// past 2^64: flagged, not wrapped, still exact to double precision.
TEST(CapacityTest, PolynomialBeyondUint64IsFlaggedNotWrapped) {
  ModelDescription m = Model(ModelKind::kPolynomialThreshold);
  m.dimension = 1000;
  m.degree = 20;
  CapacityEstimate e = Ok(m);
  const double boost = boost::math::binomial_coefficient<double>(1020, 20);
  EXPECT_NEAR(e.vc_dimension / boost, 1.0, 1e-9);
  EXPECT_GE(e.vc_dimension, boost * (1 - 1e-15));  // rounded up, never down
  EXPECT_TRUE(e.exceeds_uint64);
  EXPECT_EQ(e.status, CapacityStatus::kExact);
  // Just below and just above 2^64: C(67, 33) = 1.42e19 fits, C(68, 34) = 2.8e19 does not.
  m.dimension = 33;
  m.degree = 34;
  CapacityEstimate below = Ok(m);
  EXPECT_NEAR(below.vc_dimension, boost::math::binomial_coefficient<double>(67, 33), 1e4);
  EXPECT_FALSE(below.exceeds_uint64);
  m.degree = 35;
  CapacityEstimate above = Ok(m);
  EXPECT_NEAR(above.vc_dimension / boost::math::binomial_coefficient<double>(68, 35), 1.0,
              1e-9);
  EXPECT_TRUE(above.exceeds_uint64);
  // C(2e6, 1e6) is far beyond the double range: an error on the field.
  m.dimension = 1000000;
  m.degree = 1000000;
  EXPECT_THAT(BadFields(m), Contains("model.degree"));
}

// Source: Burges (1998), gap-tolerant classifiers (Theorem 6, from memory):
// R = 1, gamma = 0.1, d = 1000 gives h <= min(ceil(R^2/gamma^2), d) + 1 = 101.
TEST(CapacityTest, MarginLinearGapTolerant) {
  ModelDescription m = Model(ModelKind::kMarginLinear);
  m.radius = 1.0;
  m.margin = 0.1;
  m.dimension = 1000;
  CapacityEstimate e = Ok(m);
  EXPECT_EQ(e.vc_dimension, 101.0);
  EXPECT_EQ(e.status, CapacityStatus::kUpperBound);
  EXPECT_TRUE(AnyNoteHas(e, "support"));
  EXPECT_TRUE(AnyNoteHas(e, "fixed before the data"));
  m.dimension.reset();  // infinite-dimensional feature space: ceil(R^2/gamma^2) + 1
  EXPECT_EQ(Ok(m).vc_dimension, 101.0);
  m.dimension = 50;  // the dimension term wins: d + 1
  EXPECT_EQ(Ok(m).vc_dimension, 51.0);
  // Exact integer ratio: R^2/gamma^2 = 4, ceil 4, h <= 5 (not 6).
  m.dimension.reset();
  m.radius = 2.0;
  m.margin = 1.0;
  EXPECT_EQ(Ok(m).vc_dimension, 5.0);
  // R^2/gamma^2 = 6.25 -> ceil 7 -> 8.
  m.radius = 2.5;
  EXPECT_EQ(Ok(m).vc_dimension, 8.0);
  // Huge ratio without a dimension: beyond uint64, flagged.
  m.radius = 1e20;
  CapacityEstimate huge = Ok(m);
  EXPECT_TRUE(huge.exceeds_uint64);
  EXPECT_GE(huge.vc_dimension, 1e40);
  // Beyond the double range without a dimension: an error on the margin;
  // with a dimension the d + 1 term caps it.
  m.radius = 1e200;
  m.margin = 1e-200;
  EXPECT_THAT(BadFields(m), Contains("model.margin"));
  m.dimension = 7;
  EXPECT_EQ(Ok(m).vc_dimension, 8.0);
}

// Source: Shalev-Shwartz & Ben-David (2014) Ch. 6 (rectangles: 4 in the
// plane, 2d in R^d); intervals 2, unions of k intervals 2k (standard).
TEST(CapacityTest, BoxesIntervalsUnions) {
  ModelDescription boxes = Model(ModelKind::kAxisAlignedBoxes);
  boxes.dimension = 2;
  EXPECT_EQ(Ok(boxes).vc_dimension, 4.0);
  boxes.dimension = 7;
  EXPECT_EQ(Ok(boxes).vc_dimension, 14.0);
  EXPECT_EQ(Ok(Model(ModelKind::kInterval)).vc_dimension, 2.0);
  ModelDescription unions = Model(ModelKind::kUnionOfIntervals);
  unions.interval_count = 3;
  CapacityEstimate u = Ok(unions);
  EXPECT_EQ(u.vc_dimension, 6.0);
  EXPECT_EQ(u.status, CapacityStatus::kExact);
}

// Source: Leboeuf, LeBlanc & Marchand (2020), largest D with
// 2l >= C(D, floor(D/2)), evaluated in Python, and brute force for l = 1, 2, 3
// (shattering_test.cc): l = 1,2,3,10,100,1000 -> 2,3,4,6,9,13.
TEST(CapacityTest, DecisionStumpsLeboeuf) {
  const std::vector<std::pair<std::uint64_t, double>> rows = {
      {1, 2}, {2, 3}, {3, 4}, {10, 6}, {100, 9}, {1000, 13}};
  for (const auto& [l, h] : rows) {
    ModelDescription m = Model(ModelKind::kDecisionStump);
    m.feature_count = l;
    CapacityEstimate e = Ok(m);
    EXPECT_EQ(e.vc_dimension, h) << "l=" << l;
    EXPECT_EQ(e.status, CapacityStatus::kExact);
  }
  // Largest accepted l = 2^53 - 1: 2l = 1.8e16 >= C(57, 28) = 1.5e16 and
  // < C(58, 29) = 3.1e16, so D = 57.
  ModelDescription m = Model(ModelKind::kDecisionStump);
  m.feature_count = kMaxModelParameter;
  const double h = Ok(m).vc_dimension;
  EXPECT_EQ(h, 57.0);
  const double two_l = 2.0 * static_cast<double>(kMaxModelParameter);
  // Source: Boost.Math binomial_coefficient: h is the largest D with C(D, D/2) <= 2l.
  EXPECT_LE(boost::math::binomial_coefficient<double>(static_cast<unsigned>(h),
                                                      static_cast<unsigned>(h) / 2),
            two_l);
  EXPECT_GT(boost::math::binomial_coefficient<double>(static_cast<unsigned>(h) + 1,
                                                      (static_cast<unsigned>(h) + 1) / 2),
            two_l);
}

// Exact integer evaluation of the tree counting inequality (tree shapes x
// (feature, threshold) per split x leaf labels)
// 2^m <= Cat(L-1) (d(m+1))^(L-1) 2^L, for small L and d (fits in 128 bits).
std::uint64_t TreeBoundExactInteger(std::uint64_t leaves, std::uint64_t d) {
  using u128 = unsigned __int128;
  const std::uint64_t n = leaves - 1;
  u128 cat = 1;  // C(2n, n) / (n + 1)
  for (std::uint64_t i = 1; i <= n; ++i) cat = cat * (n + i) / i;
  cat /= (n + 1);
  std::uint64_t m = 0;
  while (true) {
    const std::uint64_t next = m + 1;
    u128 rhs = cat << leaves;
    for (std::uint64_t i = 0; i < n; ++i) rhs *= d * (next + 1);
    if ((static_cast<u128>(1) << next) > rhs) return m;
    m = next;
  }
}

// Source: the counting inequality above evaluated independently with exact
// Python integers: L = 8, d = 20 -> 92; L = 32, d = 100 -> 575; small cases against exact
// 128-bit integer evaluation in this test.
TEST(CapacityTest, DecisionTreeCountingBound) {
  ModelDescription m = Model(ModelKind::kDecisionTree);
  m.leaf_count = 8;
  m.feature_count = 20;
  CapacityEstimate e = Ok(m);
  EXPECT_EQ(e.vc_dimension, 92.0);
  EXPECT_EQ(e.status, CapacityStatus::kUpperBound);
  EXPECT_EQ(e.vc_dimension_lower_bound, 8.0);
  EXPECT_THAT(e.source, HasSubstr("derived for this catalogue"));
  m.leaf_count = 32;
  m.feature_count = 100;
  EXPECT_EQ(Ok(m).vc_dimension, 575.0);
  for (std::uint64_t leaves = 1; leaves <= 5; ++leaves) {
    for (std::uint64_t d : {1ULL, 2ULL, 5ULL, 10ULL}) {
      m.leaf_count = leaves;
      m.feature_count = d;
      EXPECT_EQ(Ok(m).vc_dimension, static_cast<double>(TreeBoundExactInteger(leaves, d)))
          << "L=" << leaves << " d=" << d;
    }
  }
  // A single leaf is a constant classifier: VC 1.
  m.leaf_count = 1;
  EXPECT_EQ(Ok(m).vc_dimension, 1.0);
  // Largest inputs stay finite and ordered.
  m.leaf_count = kMaxModelParameter;
  m.feature_count = kMaxModelParameter;
  CapacityEstimate big = Ok(m);
  EXPECT_TRUE(std::isfinite(big.vc_dimension));
  EXPECT_GE(big.vc_dimension, static_cast<double>(kMaxModelParameter));
}

// Source: Shalev-Shwartz & Ben-David (2014) Lemma 10.3: T = 100, d_B = 7,
// evaluated in Python with log2 gives 24745 (17643 with ln).
TEST(CapacityTest, VotedEnsembleSsbdLemma) {
  ModelDescription m = Model(ModelKind::kVotedEnsemble);
  m.member_count = 100;
  m.member_vc_dimension = 7;
  CapacityEstimate e = Ok(m);
  EXPECT_EQ(e.vc_dimension, 24745.0);
  EXPECT_EQ(e.status, CapacityStatus::kUpperBound);
  EXPECT_EQ(e.vc_dimension_lower_bound, 7.0);
  EXPECT_TRUE(AnyNoteHas(e, "log2"));
  // Below the lemma's range: raised to T = d_B = 3, said so, never smaller.
  m.member_count = 2;
  m.member_vc_dimension = 1;
  CapacityEstimate small = Ok(m);
  EXPECT_TRUE(AnyNoteHas(small, "raised to 3"));
  // 12 (3 log2 12 + 2) = 12 * 12.7549 = 153.06 -> 153.
  EXPECT_EQ(small.vc_dimension, std::floor(12 * (3 * std::log2(12.0) + 2)));
  EXPECT_EQ(small.vc_dimension, 153.0);
}

// Source: Baum & Haussler (1989): W = 1000, N = 50, 2 W log2(e N) = 14173.1
// (Python evaluation).
TEST(CapacityTest, ThresholdNetworkBaumHaussler) {
  ModelDescription m = Model(ModelKind::kThresholdNetwork);
  m.weight_count = 1000;
  m.unit_count = 50;
  CapacityEstimate e = Ok(m);
  EXPECT_EQ(e.vc_dimension, 14173.0);
  EXPECT_EQ(e.status, CapacityStatus::kUpperBound);
  EXPECT_FALSE(e.vc_dimension_lower_bound.has_value());  // no input width, no embedding bound
}

// Source: Bartlett, Harvey, Liaw & Mehrabian (2019) Thm 7 (form from memory),
// evaluated independently in Python: widths 10-32-32-1 give W = 1441, L = 3,
// Lbar = 2.221, R = 99 and VC <= 46111.
TEST(CapacityTest, ReluNetworkBhlm) {
  absl::StatusOr<NetworkShape> shape = NetworkShapeFromLayerWidths({10, 32, 32, 1});
  ASSERT_TRUE(shape.ok()) << shape.status();
  EXPECT_EQ(shape->weight_count, 1441u);
  EXPECT_EQ(shape->layer_count, 3u);
  EXPECT_EQ(shape->unit_count, 65u);
  EXPECT_EQ(shape->input_width, 10u);
  EXPECT_EQ(shape->cumulative_weights, (std::vector<std::uint64_t>{352, 1408, 1441}));

  ModelDescription m = Model(ModelKind::kReluNetwork);
  m.layer_widths = {10, 32, 32, 1};
  CapacityEstimate e = Ok(m);
  EXPECT_EQ(e.vc_dimension, 46111.0);
  EXPECT_EQ(e.status, CapacityStatus::kUpperBound);
  EXPECT_THAT(e.formula, HasSubstr("R = 99"));
  EXPECT_THAT(e.formula, HasSubstr("Lbar = 2.221"));
  EXPECT_TRUE(AnyNoteHas(e, "from memory"));
  EXPECT_EQ(e.vc_dimension_lower_bound, 11.0);  // halfspaces of R^10 embed
  // Counts that agree with the widths are accepted.
  m.weight_count = 1441;
  m.layer_count = 3;
  EXPECT_EQ(Ok(m).vc_dimension, 46111.0);
  // Counts alone: Lbar <= L and R <= L U, so the bound can only grow.
  ModelDescription counts = Model(ModelKind::kReluNetwork);
  counts.weight_count = 1441;
  counts.unit_count = 65;
  counts.layer_count = 3;
  CapacityEstimate c = Ok(counts);
  EXPECT_GE(c.vc_dimension, 46111.0);
  EXPECT_TRUE(AnyNoteHas(c, "Lbar <= L"));
}

// Source: Anthony & Bartlett (1999) Thm 8.13 (from memory): W = 1000, k = 50
// gives (W k)^2 + 11 W k log2(18 W k^2) = 2513982881.92 (Python evaluation).
TEST(CapacityTest, SigmoidNetworkAnthonyBartlett) {
  ModelDescription m = Model(ModelKind::kSigmoidNetwork);
  m.weight_count = 1000;
  m.unit_count = 50;
  CapacityEstimate e = Ok(m);
  EXPECT_NEAR(e.vc_dimension, 2.514e9, 0.0005e9);
  EXPECT_EQ(e.vc_dimension, 2513982881.0);
  EXPECT_TRUE(AnyNoteHas(e, "from memory"));
  EXPECT_FALSE(e.exceeds_uint64);
  // (W k)^2 = (1e11 * 1e6)^2 = 1e34: beyond uint64, flagged and not wrapped.
  m.weight_count = 100000000000ULL;
  m.unit_count = 1000000;
  CapacityEstimate big = Ok(m);
  EXPECT_TRUE(big.exceeds_uint64);
  EXPECT_NEAR(big.vc_dimension / 1e34, 1.0, 1e-9);
}

// Source: shattering h points needs 2^h hypotheses; ln|H| = bits ln 2
// (Kraft's inequality: a 40-bit description gives ln(1/P) = 40 ln 2).
TEST(CapacityTest, FiniteClass) {
  ModelDescription m = Model(ModelKind::kFiniteClass);
  m.hypothesis_count = 1000000;  // 2^19 = 524288 <= 1e6 < 2^20
  CapacityEstimate e = Ok(m);
  EXPECT_EQ(e.vc_dimension, 19.0);
  EXPECT_EQ(e.status, CapacityStatus::kUpperBound);
  EXPECT_NEAR(*e.log_hypothesis_count, std::log(1e6), 1e-12);
  m.hypothesis_count = 1;
  EXPECT_EQ(Ok(m).vc_dimension, 0.0);
  m.hypothesis_count = 1ULL << 40;
  EXPECT_EQ(Ok(m).vc_dimension, 40.0);
  m.hypothesis_count.reset();
  m.description_bits = 40;
  CapacityEstimate bits = Ok(m);
  EXPECT_EQ(bits.vc_dimension, 40.0);
  EXPECT_NEAR(*bits.log_hypothesis_count, 40 * std::numbers::ln2, 1e-12);
  m.description_bits = 1e300;  // finite, huge, flagged
  CapacityEstimate huge = Ok(m);
  EXPECT_TRUE(huge.exceeds_uint64);
  EXPECT_TRUE(std::isfinite(*huge.log_hypothesis_count));
}

// Source: nearest neighbour stores any labelled set (VC = infinity); Burges
// (1998) for RBF kernels.
TEST(CapacityTest, InfiniteFamiliesAreAnsweredNotRejected) {
  for (ModelKind kind : {ModelKind::kNearestNeighbour, ModelKind::kRbfKernelNoMargin}) {
    ModelDescription m = Model(kind);
    m.dimension = 5;
    CapacityEstimate e = Ok(m);
    EXPECT_EQ(e.status, CapacityStatus::kInfinite);
    EXPECT_EQ(e.vc_dimension, 0.0);
    EXPECT_TRUE(e.exceeds_uint64);
    EXPECT_TRUE(AnyNoteHas(e, "hold-out"));
    EXPECT_TRUE(AnyNoteHas(e, "compression"));
  }
  EXPECT_TRUE(AnyNoteHas(Ok(Model(ModelKind::kRbfKernelNoMargin)), "margin"));
  // A margin given to the no-margin kind points to the large-margin kind.
  ModelDescription m = Model(ModelKind::kRbfKernelNoMargin);
  m.margin = 0.1;
  absl::StatusOr<CapacityEstimate> e = EstimateCapacity(m);
  EXPECT_THAT(e,
              StatusIs(absl::StatusCode::kInvalidArgument, HasSubstr("large-margin linear kind")));
}

// Bad input: INVALID_ARGUMENT naming each field by its path.
TEST(CapacityTest, MalformedArchitecturesNameTheField) {
  ModelDescription relu = Model(ModelKind::kReluNetwork);
  relu.weight_count = 1000000000000ULL;  // 10^12
  relu.unit_count = 100;
  relu.layer_count = 3;
  EXPECT_THAT(BadFields(relu), Contains("model.weight_count"));
  relu.weight_count = 999999999999ULL;  // just below is accepted
  EXPECT_TRUE(EstimateCapacity(relu).ok());
  relu.layer_count = 0;  // zero layers
  EXPECT_THAT(BadFields(relu), Contains("model.layer_count"));
  relu.layer_count = 101;  // more layers than units
  EXPECT_THAT(BadFields(relu), Contains("model.layer_count"));

  ModelDescription widths = Model(ModelKind::kSigmoidNetwork);
  widths.layer_widths = {10};  // no computation layer
  EXPECT_THAT(BadFields(widths), Contains("model.layer_widths"));
  widths.layer_widths = {10, 0, 1};  // zero width
  EXPECT_THAT(BadFields(widths), Contains("model.layer_widths[1]"));
  widths.layer_widths = {10, 32, 2};  // two outputs
  EXPECT_THAT(BadFields(widths), Contains("model.layer_widths[2]"));
  widths.layer_widths = {2000000, 1000000, 1};  // 2e12 weights
  EXPECT_THAT(BadFields(widths), Contains("model.layer_widths"));
  widths.layer_widths = {10, 1000000000000ULL, 1};  // a width of 10^12
  EXPECT_THAT(BadFields(widths), Contains("model.layer_widths[1]"));
  widths.layer_widths = {10, 32, 1};
  widths.unit_count = 40;  // disagrees with the widths (33)
  EXPECT_THAT(BadFields(widths), Contains("model.unit_count"));

  ModelDescription thr = Model(ModelKind::kThresholdNetwork);  // nothing given
  EXPECT_THAT(BadFields(thr), Contains("model.weight_count"));

  ModelDescription margin = Model(ModelKind::kMarginLinear);
  margin.radius = std::nan("");
  margin.margin = 0.0;
  const std::vector<std::string> both = BadFields(margin);
  EXPECT_THAT(both, Contains("model.radius"));
  EXPECT_THAT(both, Contains("model.margin"));
  margin.radius = 1.0;
  margin.margin = -0.5;
  EXPECT_THAT(BadFields(margin), Contains("model.margin"));
  margin.margin = std::numeric_limits<double>::infinity();
  EXPECT_THAT(BadFields(margin), Contains("model.margin"));

  ModelDescription poly = Model(ModelKind::kPolynomialThreshold);
  poly.dimension = 3;
  poly.degree = 0;
  EXPECT_THAT(BadFields(poly), Contains("model.degree"));
  poly.degree = 2;
  poly.dimension = 0;
  EXPECT_THAT(BadFields(poly), Contains("model.dimension"));
  poly.dimension = kMaxModelParameter + 1;
  EXPECT_THAT(BadFields(poly), Contains("model.dimension"));
  // The largest accepted dimension keeps d + 1 exact (2^53 is a double).
  ModelDescription wide = Model(ModelKind::kHalfspace);
  wide.dimension = kMaxModelParameter;
  EXPECT_EQ(Ok(wide).vc_dimension, 9007199254740992.0);

  ModelDescription boxes = Model(ModelKind::kAxisAlignedBoxes);
  boxes.dimension = 2;
  boxes.with_bias = true;  // not used by boxes: reported, not ignored
  EXPECT_THAT(BadFields(boxes), Contains("model.with_bias"));

  ModelDescription tree = Model(ModelKind::kDecisionTree);
  tree.feature_count = 10;  // leaf_count missing
  EXPECT_THAT(BadFields(tree), Contains("model.leaf_count"));

  ModelDescription vote = Model(ModelKind::kVotedEnsemble);
  vote.member_count = 0;
  vote.member_vc_dimension = 3;
  EXPECT_THAT(BadFields(vote), Contains("model.member_count"));

  ModelDescription finite = Model(ModelKind::kFiniteClass);
  finite.hypothesis_count = 10;
  finite.description_bits = 4;  // both
  EXPECT_THAT(BadFields(finite), Contains("model.hypothesis_count"));
  finite.hypothesis_count.reset();
  finite.description_bits = std::nan("");
  EXPECT_THAT(BadFields(finite), Contains("model.description_bits"));
  finite.description_bits.reset();
  finite.hypothesis_count = 0;
  EXPECT_THAT(BadFields(finite), Contains("model.hypothesis_count"));

  // Unset (the API's unspecified, or a value the server does not know).
  ModelDescription unknown;
  EXPECT_THAT(BadFields(unknown), Contains("model.kind"));
}

// The growth-function bound the VC families use (vc.h VcLogGrowthBound:
// ln Pi(2m) <= h (ln(2m/h) + 1), the closed form (e x / h)^h of the
// Sauer-Shelah sum at x = 2m points, and never more than 2m ln 2).
// Source: Sauer (1972); Shelah (1972); the closed form, e.g. Shalev-Shwartz &
// Ben-David (2014), Lemma 6.10 (from memory). Worked value by hand: x = 10,
// h = 2: (e 10 / 2)^2 = 184.73; the sum itself is 1 + 10 + 45 = 56.
TEST(GrowthFunctionTest, ClosedFormWorkedValue) {
  EXPECT_NEAR(std::exp(VcLogGrowthBound(2, 5)), 184.73, 0.01);
  EXPECT_EQ(VcLogGrowthBound(0, 5), 0.0);
  // h >= 2m: only the trivial 2^(2m).
  EXPECT_NEAR(VcLogGrowthBound(12, 5), 10 * std::numbers::ln2, 1e-12);
  EXPECT_NEAR(VcLogGrowthBound(10, 5), 10 * std::numbers::ln2, 1e-12);
}

// Source: exact 128-bit integer sums sum_{i<=h} C(x, i), computed in this
// test: the bound is never below ln of the exact Sauer-Shelah count at
// x = 2m points, for every m <= 50 and h <= x.
TEST(GrowthFunctionTest, NeverBelowExactIntegerSums) {
  using u128 = unsigned __int128;
  for (std::uint64_t m = 1; m <= 50; ++m) {
    const std::uint64_t x = 2 * m;
    u128 c = 1;  // C(x, h)
    u128 sum = 0;
    for (std::uint64_t h = 0; h <= x; ++h) {
      if (h > 0) c = c * (x - h + 1) / h;
      sum += c;
      const double exact = std::log(static_cast<double>(sum));
      EXPECT_LE(exact, VcLogGrowthBound(static_cast<double>(h), static_cast<double>(m)) + 1e-12)
          << "h=" << h << " m=" << m;
    }
  }
}

}  // namespace
}  // namespace riskbound::core
