// Capacity measured on the data (evidence.relabel): the estimate from raw
// relabel-and-retrain draws against brute force over every sign vector and
// every labelling of a small sample of thresholds on the line, the
// certificates' formulas, validation field paths, heuristic marking and the
// gate's refusal.
#include <algorithm>
#include <cmath>
#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "service/core/certify.h"
#include "service/core/gate.h"
#include "service/core/rademacher.h"

namespace riskbound::core {
namespace {

using ::testing::Contains;
using ::testing::HasSubstr;

// The class {x -> s * sign(x - t)} (thresholds, both polarities) on the m
// points 0 < 1 < ... < m-1: the 2m labellings "first k points -s, the rest
// +s" for k = 0..m and s = +1, -1. Returns the labelling of hypothesis (k, s).
int Threshold(int i, int k, int s) { return i < k ? -s : s; }

// Brute force: the least number of errors of the class on labels z.
int MinErrors(const std::vector<int>& z) {
  const int m = static_cast<int>(z.size());
  int best = m;
  for (int s : {1, -1}) {
    for (int k = 0; k <= m; ++k) {
      int errors = 0;
      for (int i = 0; i < m; ++i) errors += Threshold(i, k, s) != z[i];
      best = std::min(best, errors);
    }
  }
  return best;
}

std::vector<int> Signs(unsigned bits, int m) {
  std::vector<int> z(m);
  for (int i = 0; i < m; ++i) z[i] = ((bits >> i) & 1U) ? 1 : -1;
  return z;
}

// Source: brute force (Mohri, Rostamizadeh & Talwalkar 2018, Definition 3.1:
// Rhat_S(H) = E_sigma sup_h (1/m) sum sigma_i h(x_i), the expectation taken
// exactly over all 2^m sign vectors and the supremum over all 2m threshold
// labellings, as a correlation). Draws = every sign vector once, each
// reported as the retrained model's error count on labels sigma * y; their
// mean must be the exact complexity, whatever the original labels y.
TEST(RelabelTest, RandomSignsOverEverySignVectorIsTheExactComplexity) {
  for (int m : {1, 2, 5, 8}) {
    const std::vector<int> y = Signs(0b10110101U, m);  // some fixed labels
    RelabelEvidence e;
    e.error_count = 0;
    e.sample_count = m;
    e.scheme = RelabelScheme::kRandomSigns;
    e.training = RelabelTraining::kExact;
    double exact = 0.0;
    for (unsigned bits = 0; bits < (1U << m); ++bits) {
      const std::vector<int> sigma = Signs(bits, m);
      int best = -m;
      for (int s : {1, -1}) {
        for (int k = 0; k <= m; ++k) {
          int corr = 0;
          for (int i = 0; i < m; ++i) corr += sigma[i] * Threshold(i, k, s);
          best = std::max(best, corr);
        }
      }
      exact += static_cast<double>(best) / m;
      std::vector<int> relabelled(m);
      for (int i = 0; i < m; ++i) relabelled[i] = sigma[i] * y[i];
      e.draws.push_back({static_cast<std::uint64_t>(MinErrors(relabelled)), 0, 0});
    }
    exact /= static_cast<double>(1U << m);
    SCOPED_TRACE(m);
    EXPECT_NEAR(RelabelEstimate(e), exact, 1e-15);
  }
}

// Source: brute force (Bartlett, Boucheron & Lugosi 2002: the maximal
// discrepancy max_h (L_A(h) - L_B(h)) over the two halves, here the odd and
// the even indices). For every labelling y of m = 8 points the minimiser of
// the errors with A's labels flipped, reported as its error counts on each
// half under the original labels, gives that maximum.
TEST(RelabelTest, HalfFlipMinimiserGivesTheMaximalDiscrepancy) {
  const int m = 8;
  for (unsigned bits = 0; bits < (1U << m); ++bits) {
    const std::vector<int> y = Signs(bits, m);
    int best_gap = -m;  // max over h of (errors on A - errors on B)
    int best_flipped_errors = m + 1;
    std::uint64_t f = 0, k = 0;
    for (int s : {1, -1}) {
      for (int t = 0; t <= m; ++t) {
        int on_a = 0, on_b = 0, flipped = 0;
        for (int i = 0; i < m; ++i) {
          const bool wrong = Threshold(i, t, s) != y[i];
          (i % 2 == 1 ? on_a : on_b) += wrong;
          flipped += (i % 2 == 1) ? !wrong : wrong;
        }
        best_gap = std::max(best_gap, on_a - on_b);
        if (flipped < best_flipped_errors) {  // the learner: least flipped-sample errors
          best_flipped_errors = flipped;
          f = on_a;
          k = on_b;
        }
      }
    }
    RelabelEvidence e;
    e.sample_count = m;
    e.scheme = RelabelScheme::kHalfFlip;
    e.training = RelabelTraining::kExact;
    e.draws.push_back({0, f, k});
    SCOPED_TRACE(bits);
    EXPECT_DOUBLE_EQ(RelabelEstimate(e), best_gap / (m / 2.0));
  }
}

RelabelEvidence Signed(std::uint64_t k, std::uint64_t m, std::vector<std::uint64_t> errors,
                       RelabelTraining training = RelabelTraining::kExact) {
  RelabelEvidence e;
  e.error_count = k;
  e.sample_count = m;
  e.scheme = RelabelScheme::kRandomSigns;
  e.training = training;
  for (std::uint64_t v : errors) e.draws.push_back({v, 0, 0});
  return e;
}

// Source: Mohri, Rostamizadeh & Talwalkar (2018), Thm 3.5 at delta/2 with
// the McDiarmid (1989) slack at delta/2, evaluated here in long double from
// the formula (k/m + max(0, Rhat_N + sqrt(2 ln(2/delta)/(mN))) +
// 3 sqrt(ln(4/delta)/(2m))).
TEST(RelabelTest, RandomSignsCertificateFollowsTheFormula) {
  const RelabelEvidence e = Signed(30, 1000, {420, 431, 415, 440});
  const double delta = 0.05;
  const Certificate c = RademacherFromDraws(e, delta);
  const long double m = 1000, n = 4;
  const long double rhat = 1.0L - 2.0L * (420 + 431 + 415 + 440) / (m * n);
  const long double slack = std::sqrt(2.0L * std::log(2.0L / delta) / (m * n));
  const long double want =
      30 / m + std::max(0.0L, rhat + slack) + 3.0L * std::sqrt(std::log(4.0L / delta) / (2 * m));
  EXPECT_NEAR(c.risk_upper_bound, static_cast<double>(want), 1e-12);
  EXPECT_EQ(c.family, Family::kRademacher);
  EXPECT_FALSE(c.heuristic);
  EXPECT_THAT(c.notes, Contains(HasSubstr("valid only because every retraining")));
  EXPECT_THAT(c.notes, Contains(HasSubstr("Rhat_N = 0.147000")));
}

// Source: the maximal-discrepancy bound in the form derived in
// rademacher.cc (Bartlett, Boucheron & Lugosi 2002; McDiarmid 1989):
// k/m + D_N + 3 sqrt(ln(1/delta)/(2m)), evaluated here from the formula.
TEST(RelabelTest, HalfFlipCertificateFollowsTheFormula) {
  RelabelEvidence e;
  e.error_count = 12;
  e.sample_count = 400;
  e.scheme = RelabelScheme::kHalfFlip;
  e.training = RelabelTraining::kExact;
  e.draws = {{0, 40, 10}, {0, 35, 12}};
  const Certificate c = MaximalDiscrepancyBound(e, 0.01);
  const long double d = ((40 - 10) + (35 - 12)) / (2.0L * 200.0L);
  const long double want = 12 / 400.0L + d + 3.0L * std::sqrt(std::log(100.0L) / 800.0L);
  EXPECT_NEAR(c.risk_upper_bound, static_cast<double>(want), 1e-12);
  EXPECT_EQ(c.family, Family::kMaximalDiscrepancy);
  EXPECT_FALSE(c.risk_lower_bound.has_value());
}

std::vector<std::string> FieldsOf(const absl::Status& s) {
  std::vector<std::string> out;
  for (const FieldViolation& v : ViolationReportOf(s).listed) out.push_back(v.field);
  return out;
}

TEST(RelabelTest, ValidationNamesEveryBadField) {
  Evidence ev;
  RelabelEvidence r;
  r.error_count = 3;
  r.sample_count = 11;  // odd: refused for a half flip
  r.scheme = RelabelScheme::kHalfFlip;
  r.draws = {{0, 6, 1}, {2, 1, 1}};  // 6 > 11/2; an unused count set
  ev.relabel = r;
  const std::vector<std::string> fields = FieldsOf(ValidateEvidence(ev));
  EXPECT_THAT(fields, Contains("evidence.relabel.training"));
  EXPECT_THAT(fields, Contains("evidence.relabel.sample_count"));
  EXPECT_THAT(fields, Contains("evidence.relabel.draws[0].flipped_half_error_count"));
  EXPECT_THAT(fields, Contains("evidence.relabel.draws[1].relabelled_error_count"));

  Evidence none;
  RelabelEvidence empty;
  empty.sample_count = 10;
  empty.training = RelabelTraining::kExact;
  none.relabel = empty;
  none.rademacher = RademacherEvidence{};
  none.rademacher->sample_count = 10;
  const std::vector<std::string> f2 = FieldsOf(ValidateEvidence(none));
  EXPECT_THAT(f2, Contains("evidence.relabel.scheme"));
  EXPECT_THAT(f2, Contains("evidence.relabel.draws"));

  Evidence both;
  both.rademacher = RademacherEvidence{};
  both.rademacher->sample_count = 10;
  both.relabel = Signed(0, 10, {4});
  EXPECT_THAT(FieldsOf(ValidateEvidence(both)), Contains("evidence.relabel"));

  Evidence over;
  over.relabel = Signed(0, 10, {11});
  EXPECT_THAT(FieldsOf(ValidateEvidence(over)),
              Contains("evidence.relabel.draws[0].relabelled_error_count"));
}

// 5000 bad draws: 10 named, one violation for the rest, and every one of them
// counted (the details' violation_count used to say 11). Found by the
// bad-input table (tests/integration/bad_input_table_test.py).
TEST(RelabelTest, EveryBadDrawIsCounted) {
  Evidence ev;
  ev.relabel = Signed(0, 10, std::vector<std::uint64_t>(5000, 11));
  const ViolationReport report = ViolationReportOf(ValidateEvidence(ev));
  ASSERT_THAT(report.listed, ::testing::SizeIs(11));
  EXPECT_EQ(report.listed.back().field, "evidence.relabel.draws");
  EXPECT_EQ(report.listed.size() + report.unlisted_count, 5000u);
}

// Approximate training: certified, marked heuristic, never the tightest
// while a valid certificate exists.
TEST(RelabelTest, ApproximateTrainingIsHeuristicAndNeverTightestBesideAValidOne) {
  CertifyRequest req;
  req.evidence.relabel = Signed(0, 100000, {49900, 49950}, RelabelTraining::kApproximate);
  req.evidence.holdout = SampleCounts{30, 1000};
  req.family_choice = FamilyChoice::kAllApplicable;
  const absl::StatusOr<CertifyResult> r = Certify(req, StopToken::Never());
  ASSERT_TRUE(r.ok()) << r.status();
  bool saw = false;
  for (const Certificate& c : r->certificates) {
    if (c.family == Family::kRademacher) {
      saw = true;
      EXPECT_TRUE(c.heuristic);
      EXPECT_THAT(c.notes, Contains(HasSubstr("HEURISTIC, NOT A BOUND")));
    }
  }
  EXPECT_TRUE(saw);
  // The heuristic row is the smallest number here, but not reported tightest.
  EXPECT_FALSE(r->certificates[r->tightest_index].heuristic);

  CertifyRequest alone;
  alone.evidence.relabel = Signed(0, 1000, {450}, RelabelTraining::kApproximate);
  const absl::StatusOr<CertifyResult> a = Certify(alone, StopToken::Never());
  ASSERT_TRUE(a.ok()) << a.status();
  ASSERT_EQ(a->certificates.size(), 1u);
  EXPECT_TRUE(a->certificates[0].heuristic);
}

TEST(RelabelTest, RecommendedFamilyFollowsTheScheme) {
  CertifyRequest req;
  RelabelEvidence r = Signed(5, 200, {0});
  r.scheme = RelabelScheme::kHalfFlip;
  r.draws = {{0, 30, 20}};
  req.evidence.relabel = r;
  const absl::StatusOr<CertifyResult> res = Certify(req, StopToken::Never());
  ASSERT_TRUE(res.ok()) << res.status();
  EXPECT_EQ(res->certificates.at(0).family, Family::kMaximalDiscrepancy);
}

TEST(RelabelTest, GateRefusesApproximateTrainingNamingTheField) {
  GatePolicy policy;
  policy.max_risk = 0.5;
  policy.allowed_families = {Family::kMaximalDiscrepancy};
  GateCandidate candidate;
  candidate.id = "m1";
  RelabelEvidence r;
  r.error_count = 5;
  r.sample_count = 2000;
  r.scheme = RelabelScheme::kHalfFlip;
  r.training = RelabelTraining::kApproximate;
  r.draws = {{0, 30, 20}};
  candidate.evidence.relabel = r;
  const absl::StatusOr<GateDecision> refused = DecideGate(policy, candidate, std::nullopt);
  ASSERT_FALSE(refused.ok());
  EXPECT_THAT(FieldsOf(refused.status()), Contains("candidate.evidence.relabel.training"));

  candidate.evidence.relabel->training = RelabelTraining::kExact;
  const absl::StatusOr<GateDecision> ok = DecideGate(policy, candidate, std::nullopt);
  ASSERT_TRUE(ok.ok()) << ok.status();
  EXPECT_EQ(ok->risk_certificate.family, Family::kMaximalDiscrepancy);
}

}  // namespace
}  // namespace riskbound::core
