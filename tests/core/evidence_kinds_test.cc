// The registry rows, validation and Certify rules for the bounded-loss,
// PAC-Bayes, Rademacher and sample-compression evidence kinds.
#include <cmath>
#include <limits>
#include <string>
#include <vector>

#include "absl/strings/match.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "service/core/bounded_loss.h"
#include "service/core/certify.h"
#include "service/core/families.h"
#include "service/core/holdout.h"
#include "tests/testing/status_matchers.h"

namespace riskbound::core {
namespace {

using ::riskbound::testing::StatusIs;
using ::testing::ElementsAre;
using ::testing::HasSubstr;

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
constexpr double kInf = std::numeric_limits<double>::infinity();

Evidence Bounded(double mean, double var, std::uint64_t n, double a = 0.0, double b = 1.0) {
  Evidence e;
  e.bounded_loss = BoundedLossEvidence{mean, var, n, a, b};
  return e;
}
Evidence PacBayes(double kl, double risk, std::uint64_t m) {
  Evidence e;
  e.pac_bayes = PacBayesEvidence{kl, risk, m, PacBayesTarget::kGibbs};
  return e;
}
Evidence Rademacher(std::uint64_t k, std::uint64_t m, double rhat, std::uint64_t draws = 0) {
  Evidence e;
  e.rademacher = RademacherEvidence{{k, m}, rhat, draws};
  return e;
}
Evidence Compression(std::uint64_t m, std::uint64_t d, std::uint64_t k) {
  Evidence e;
  e.compression = CompressionEvidence{m, d, k, false};
  return e;
}

std::vector<std::string> Fields(const absl::Status& s) {
  std::vector<std::string> out;
  for (const FieldViolation& v : FieldViolationsOf(s)) out.push_back(v.field);
  return out;
}

// The stable enum values and slugs (audit records store them).
TEST(EvidenceKindsTest, RegistryRows) {
  const std::vector<std::pair<Family, std::string>> want = {
      {Family::kBoundedHoeffding, "bounded-hoeffding"},
      {Family::kBoundedKl, "bounded-kl"},
      {Family::kBoundedEmpiricalBernstein, "bounded-empirical-bernstein"},
      {Family::kPacBayesMcAllester, "pac-bayes-mcallester"},
      {Family::kPacBayesKl, "pac-bayes-kl"},
      {Family::kPacBayesCatoni, "pac-bayes-catoni"},
      {Family::kRademacher, "rademacher"},
      {Family::kSampleCompression, "sample-compression"}};
  int value = 8;
  for (const auto& [family, slug] : want) {
    EXPECT_EQ(static_cast<int>(family), value++);
    const FamilySpec* spec = FindFamily(family);
    ASSERT_NE(spec, nullptr) << slug;
    EXPECT_EQ(spec->family_name, slug);
    EXPECT_EQ(FindFamilyByName(slug), spec);
    EXPECT_FALSE(spec->source.empty());
    EXPECT_FALSE(spec->assumptions.empty());
    EXPECT_FALSE(spec->evidence_needed.empty());
  }
  // The empirical Bernstein row needs two samples.
  const FamilySpec* eb = FindFamily(Family::kBoundedEmpiricalBernstein);
  EXPECT_FALSE(eb->applies(Bounded(0.5, 0.0, 1)));
  EXPECT_TRUE(eb->applies(Bounded(0.5, 0.0, 2)));
}

// The training-set families are exactly those that read a capacity: the
// two VC families (Vapnik & Chervonenkis 1971; Vapnik 1998, Theorem 4.1)
// and the two finite-class families (Blumer et al. 1987). Planner and
// selector messages list them from this one function.
TEST(EvidenceKindsTest, TrainingFamilyNamesListsCapacityFamilies) {
  EXPECT_EQ(TrainingFamilyNames(), "vc-additive, vc-relative, occam-hoeffding, occam-kl");
  for (const FamilySpec& spec : Families()) {
    const bool listed = absl::StrContains(TrainingFamilyNames(), spec.family_name);
    EXPECT_EQ(listed, spec.capacity_measure != CapacityMeasure::kNone) << spec.family_name;
  }
}

TEST(EvidenceKindsTest, EachKindAloneIsEnoughEvidence) {
  for (const Evidence& e : {Bounded(0.2, 0.01, 100), PacBayes(5, 0.1, 1000),
                            Rademacher(10, 1000, 0.05), Compression(1000, 10, 0)}) {
    EXPECT_TRUE(ValidateEvidence(e).ok()) << ValidateEvidence(e);
  }
  EXPECT_THAT(ValidateEvidence(Evidence{}),
              StatusIs(absl::StatusCode::kInvalidArgument,
                       HasSubstr("evidence.compression")));
}

TEST(EvidenceKindsTest, BoundedLossValidationNamesFields) {
  EXPECT_THAT(Fields(ValidateEvidence(Bounded(0.5, 0.1, 0))),
              ElementsAre("evidence.bounded_loss.sample_count"));
  EXPECT_THAT(Fields(ValidateEvidence(Bounded(1.5, 0.1, 10))),
              ElementsAre("evidence.bounded_loss.mean_loss"));
  EXPECT_THAT(Fields(ValidateEvidence(Bounded(kNaN, kInf, 10))),
              ElementsAre("evidence.bounded_loss.mean_loss",
                          "evidence.bounded_loss.sample_variance"));
  EXPECT_THAT(Fields(ValidateEvidence(Bounded(0.5, -1e-3, 10))),
              ElementsAre("evidence.bounded_loss.sample_variance"));
  EXPECT_THAT(Fields(ValidateEvidence(Bounded(0.5, 0.1, 10, 1.0, 1.0))),
              ElementsAre("evidence.bounded_loss.loss_max"));
  EXPECT_THAT(Fields(ValidateEvidence(Bounded(0.5, 0.1, 10, kNaN, 1.0))),
              ElementsAre("evidence.bounded_loss.loss_min"));
  EXPECT_THAT(Fields(ValidateEvidence(Bounded(0.0, 0.0, 10, -1e308, 1e308))),
              ElementsAre("evidence.bounded_loss.loss_max"));
  // Largest unbiased variance of values in [0, 1] with n = 2: 1/4 * 2 = 0.5
  // (one 0 and one 1: var(ddof=1) = 0.5).
  EXPECT_TRUE(ValidateEvidence(Bounded(0.5, 0.5, 2)).ok());
  EXPECT_THAT(ValidateEvidence(Bounded(0.5, 0.5001, 2)),
              StatusIs(absl::StatusCode::kInvalidArgument,
                       HasSubstr("evidence.bounded_loss.sample_variance")));
  // Same in other units: [10, 30], n = 2: (20)^2 / 4 * 2 = 200.
  EXPECT_TRUE(ValidateEvidence(Bounded(20, 200, 2, 10, 30)).ok());
  EXPECT_FALSE(ValidateEvidence(Bounded(20, 201, 2, 10, 30)).ok());
  // n = 1: the variance is not used but must still be a number.
  EXPECT_TRUE(ValidateEvidence(Bounded(0.5, 0.0, 1)).ok());
}

TEST(EvidenceKindsTest, PacBayesRademacherCompressionValidation) {
  EXPECT_THAT(Fields(ValidateEvidence(PacBayes(-1, 1.5, 0))),
              ElementsAre("evidence.pac_bayes.kl_divergence",
                          "evidence.pac_bayes.gibbs_empirical_risk",
                          "evidence.pac_bayes.sample_count"));
  EXPECT_THAT(Fields(ValidateEvidence(PacBayes(kInf, kNaN, 10))),
              ElementsAre("evidence.pac_bayes.kl_divergence",
                          "evidence.pac_bayes.gibbs_empirical_risk"));
  Evidence bad_target = PacBayes(1, 0.1, 10);
  bad_target.pac_bayes->target = std::nullopt;  // unset, or unknown on the wire
  EXPECT_THAT(Fields(ValidateEvidence(bad_target)), ElementsAre("evidence.pac_bayes.target"));

  EXPECT_THAT(Fields(ValidateEvidence(Rademacher(11, 10, 1.5))),
              ElementsAre("evidence.rademacher.error_count",
                          "evidence.rademacher.empirical_rademacher"));
  EXPECT_THAT(Fields(ValidateEvidence(Rademacher(0, 0, -0.1))),
              ElementsAre("evidence.rademacher.sample_count",
                          "evidence.rademacher.empirical_rademacher"));
  EXPECT_TRUE(ValidateEvidence(Rademacher(0, 10, -0.1, 5)).ok());  // Monte-Carlo average
  EXPECT_FALSE(ValidateEvidence(Rademacher(0, 10, kNaN, 5)).ok());

  EXPECT_THAT(Fields(ValidateEvidence(Compression(10, 11, 0))),
              ElementsAre("evidence.compression.compression_size"));
  EXPECT_THAT(Fields(ValidateEvidence(Compression(10, 4, 7))),
              ElementsAre("evidence.compression.outside_error_count"));
  EXPECT_THAT(Fields(ValidateEvidence(Compression(0, 0, 0))),
              ElementsAre("evidence.compression.sample_count"));
  EXPECT_TRUE(ValidateEvidence(Compression(10, 10, 0)).ok());
  EXPECT_THAT(Fields(ValidateEvidence(Compression((1ULL << 53) + 1, 0, 0))),
              ElementsAre("evidence.compression.sample_count"));
}

// The fixed rule of FamilyChoice::kRecommended (certify.h).
TEST(EvidenceKindsTest, RecommendedFamilyByKind) {
  auto pick = [](const Evidence& e) {
    CertifyRequest req;
    req.evidence = e;
    auto got = Certify(req);
    EXPECT_TRUE(got.ok()) << got.status();
    EXPECT_EQ(got->spent_failure_probability, 0.05);
    return got->certificates.at(0).family;
  };
  EXPECT_EQ(pick(Bounded(0.2, 0.01, 100)), Family::kBoundedKl);
  EXPECT_EQ(pick(Compression(1000, 10, 0)), Family::kSampleCompression);
  EXPECT_EQ(pick(PacBayes(5, 0.1, 1000)), Family::kPacBayesKl);
  EXPECT_EQ(pick(Rademacher(10, 1000, 0.05)), Family::kRademacher);
  Evidence both = Compression(1000, 10, 0);
  both.pac_bayes = PacBayesEvidence{5, 0.1, 1000};
  both.rademacher = RademacherEvidence{{10, 1000}, 0.05, 0};
  EXPECT_EQ(pick(both), Family::kSampleCompression);
  both.holdout = SampleCounts{3, 300};
  EXPECT_EQ(pick(both), Family::kHoldoutExactBinomial);
}

// Listing the empirical Bernstein family on one sample is refused with the
// family's needs, naming the list entry.
TEST(EvidenceKindsTest, EmpiricalBernsteinNeedsTwoSamples) {
  CertifyRequest req;
  req.evidence = Bounded(0.3, 0.0, 1);
  req.family_choice = FamilyChoice::kListed;
  req.listed.families = {Family::kBoundedEmpiricalBernstein};
  EXPECT_THAT(Certify(req),
              StatusIs(absl::StatusCode::kInvalidArgument,
                       HasSubstr("listed.families[0]: bounded-empirical-bernstein needs "
                                 "evidence.bounded_loss with sample_count >= 2")));
  req.family_choice = FamilyChoice::kAllApplicable;
  req.listed.families.clear();
  auto got = Certify(req);
  ASSERT_TRUE(got.ok()) << got.status();
  EXPECT_EQ(got->certificates.size(), 2u);  // Hoeffding and kl only
}

// Error rates and bounded losses are different quantities: the tightest
// certificate is chosen among the error-rate ones, the baseline error rate
// never marks a bounded-loss certificate vacuous, and the union bound still
// counts every family (Bonferroni union bound).
TEST(EvidenceKindsTest, MixedUnitsAreNotCompared) {
  CertifyRequest req;
  req.evidence = Bounded(0.001, 0.0, 100000);  // a small Brier-type loss in [0, 1]
  req.evidence.holdout = SampleCounts{40, 100};
  req.evidence.baseline_error_rate = 0.3;
  req.family_choice = FamilyChoice::kAllApplicable;
  req.failure_probability = 0.06;
  auto got = Certify(req);
  ASSERT_TRUE(got.ok()) << got.status();
  ASSERT_EQ(got->certificates.size(), 6u);
  EXPECT_NEAR(got->spent_failure_probability, 0.06, 1e-15);
  const Certificate& tight = got->certificates[got->tightest_index];
  EXPECT_FALSE(tight.loss_range.has_value());
  EXPECT_EQ(tight.family, Family::kHoldoutExactBinomial);
  for (const Certificate& c : got->certificates) {
    EXPECT_DOUBLE_EQ(c.failure_probability, 0.01);
    if (c.loss_range.has_value()) {
      EXPECT_LT(c.risk_upper_bound, tight.risk_upper_bound);  // smaller, yet not "tightest"
      EXPECT_FALSE(c.vacuous);
    } else {
      EXPECT_TRUE(c.vacuous);  // 40/100 errors: above the 0.3 baseline
    }
  }
  // A cost in [0, 1000] with mean 0.5: its bounds exceed the 0.3 baseline
  // error rate, which says nothing about this loss, so they stay non-vacuous.
  req.evidence.bounded_loss = BoundedLossEvidence{0.5, 1.0, 100000, 0.0, 1000.0};
  got = Certify(req);
  ASSERT_TRUE(got.ok());
  for (const Certificate& c : got->certificates) {
    if (!c.loss_range.has_value()) continue;
    EXPECT_GT(c.risk_upper_bound, 0.3);
    EXPECT_FALSE(c.vacuous);
    EXPECT_EQ(c.loss_range->loss_max, 1000.0);
  }
  // Bounded loss alone: the tightest is among the bounded-loss ones.
  req.evidence.holdout.reset();
  got = Certify(req);
  ASSERT_TRUE(got.ok());
  ASSERT_EQ(got->certificates.size(), 3u);
  for (const Certificate& c : got->certificates) {
    EXPECT_GE(c.risk_upper_bound, got->certificates[got->tightest_index].risk_upper_bound);
  }
}

// Every new family through Certify with extreme but valid inputs: never
// NaN/Inf (common practice).
TEST(EvidenceKindsTest, CertifyAllNewKindsExtremeInputs) {
  for (double delta : {1e-300, 0.5, 1 - 1e-12}) {
    CertifyRequest req;
    req.failure_probability = delta;
    req.family_choice = FamilyChoice::kAllApplicable;
    req.evidence = Bounded(-5, 0, 2, -5, 5);
    req.evidence.pac_bayes = PacBayesEvidence{0, 1, 1, PacBayesTarget::kMajorityVote};
    req.evidence.rademacher = RademacherEvidence{{1, 1}, 1.0, 1};
    req.evidence.compression = CompressionEvidence{1'000'000'000'000'000ULL, 0, 0, true};
    auto got = Certify(req);
    ASSERT_TRUE(got.ok()) << got.status();
    EXPECT_EQ(got->certificates.size(), 8u);
    for (const Certificate& c : got->certificates) {
      EXPECT_TRUE(std::isfinite(c.risk_upper_bound));
      EXPECT_TRUE(std::isfinite(c.penalty));
      EXPECT_TRUE(std::isfinite(c.empirical_risk));
    }
  }
}

// Property grid over the new families (brute force; the properties are the
// ones every published family satisfies: Hoeffding 1963, Maurer & Pontil 2009,
// McAllester 2003, Mohri et al. 2018, Langford 2005): inside
// [empirical, range end], non-increasing in the sample size at a fixed rate
// (not checked for compression, where the rate moves with d), non-decreasing
// in the capacity term (KL, Rademacher complexity, compression size) and as
// delta shrinks.
Evidence AllKinds(double rate, std::uint64_t m, double cap) {
  Evidence e;
  const auto k = static_cast<std::uint64_t>(std::llround(rate * static_cast<double>(m)));
  const double mean = static_cast<double>(k) / static_cast<double>(m);
  e.bounded_loss = BoundedLossEvidence{
      mean, mean * (1 - mean) * static_cast<double>(m) / static_cast<double>(m - 1), m, 0.0, 1.0};
  e.pac_bayes = PacBayesEvidence{cap, mean, m, PacBayesTarget::kGibbs};
  e.rademacher = RademacherEvidence{{k, m}, std::min(1.0, cap / 200.0), 0};
  const auto d = static_cast<std::uint64_t>(cap);
  e.compression = CompressionEvidence{
      m, d, static_cast<std::uint64_t>(std::llround(rate * static_cast<double>(m - d))), false};
  // Half-flip draws with maximal discrepancy exactly cap/20 (4 draws, the
  // flipped-half excess m cap / 10 spread over them; m a multiple of 10).
  RelabelEvidence r;
  r.error_count = k;
  r.sample_count = m;
  r.scheme = RelabelScheme::kHalfFlip;
  r.training = RelabelTraining::kExact;
  std::uint64_t excess = m * static_cast<std::uint64_t>(cap) / 10;
  for (int j = 0; j < 4; ++j) {
    const std::uint64_t f = std::min(m / 2, excess);
    excess -= f;
    r.draws.push_back({0, f, 0});
  }
  e.relabel = r;
  return e;
}

TEST(EvidenceKindsTest, PropertyGrid) {
  const std::vector<double> deltas = {0.5, 0.05, 1e-3, 1e-9, 1e-300};
  const std::vector<double> rates = {0.0, 0.01, 0.1, 0.5};
  const std::vector<std::uint64_t> sizes = {10, 100, 1000, 10000, 100000};
  const std::vector<double> caps = {0, 1, 4, 9};
  int checked = 0;
  for (const FamilySpec& spec : Families()) {
    // The families after the hold-out ones (holdout-anytime, number 16, is a
    // hold-out family: AllKinds has no hold-out counts for it).
    if (static_cast<int>(spec.family) < 8 || spec.family == Family::kHoldoutAnytime) continue;
    SCOPED_TRACE(std::string(spec.family_name));
    const bool compression = spec.family == Family::kSampleCompression;
    for (double rate : rates) {
      for (double cap : caps) {
        for (double delta : deltas) {
          double prev_m = 2.0;
          for (std::uint64_t m : sizes) {
            const Certificate c = spec.compute(AllKinds(rate, m, cap), delta);
            EXPECT_TRUE(std::isfinite(c.risk_upper_bound));
            EXPECT_GE(c.risk_upper_bound, c.empirical_risk);
            EXPECT_LE(c.risk_upper_bound, 1.0);
            if (!compression) {
              EXPECT_LE(c.risk_upper_bound, prev_m + 1e-12) << "m=" << m << " rate=" << rate;
            }
            prev_m = c.risk_upper_bound;
            ++checked;
          }
        }
      }
    }
    for (std::uint64_t m : sizes) {
      double prev = -1;
      for (double cap : caps) {
        const double u = spec.compute(AllKinds(0.1, m, cap), 0.05).risk_upper_bound;
        EXPECT_GE(u, prev - 1e-12) << "cap=" << cap << " m=" << m;
        prev = u;
      }
      prev = -1;
      for (double delta : deltas) {
        const double u = spec.compute(AllKinds(0.1, m, 4), delta).risk_upper_bound;
        EXPECT_GE(u, prev - 1e-12) << "delta=" << delta << " m=" << m;
        prev = u;
      }
    }
  }
  EXPECT_EQ(checked, 9 * 4 * 4 * 5 * 5);  // 9 families from bounded-hoeffding on
}

}  // namespace
}  // namespace riskbound::core
