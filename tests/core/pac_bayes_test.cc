// PAC-Bayes families (McAllester, kl, Catoni) against scipy references, the
// published forms' worked values (McAllester 2003, Maurer 2004, Catoni 2007)
// evaluated independently in Python, orderings and edge cases.
#include "service/core/pac_bayes.h"

#include <cmath>
#include <cstdint>

#include "absl/strings/str_format.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "tests/testing/fixture.h"

namespace riskbound::core {
namespace {

using ::riskbound::testing::Num;
using ::riskbound::testing::ReadFixture;
using ::testing::Contains;
using ::testing::HasSubstr;
using ::testing::Not;

PacBayesEvidence Gibbs(double kl, double risk, std::uint64_t m) {
  PacBayesEvidence e;
  e.kl_divergence = kl;
  e.gibbs_empirical_risk = risk;
  e.sample_count = m;
  return e;
}

// The "classic" McAllester form (McAllester 1999; the ln(2 sqrt(m)/delta)
// constant of Maurer 2004), written out here as the reference
// for the orderings: R_emp + sqrt((KL + ln(2 sqrt(m)/delta)) / (2m)).
double Classic(const PacBayesEvidence& e, double delta) {
  const double m = static_cast<double>(e.sample_count);
  return e.gibbs_empirical_risk +
         std::sqrt((e.kl_divergence + std::log(2 * std::sqrt(m) / delta)) / (2 * m));
}

// Source: McAllester (2003) Thm 1 (from memory), the classic form, the kl
// bound (Seeger 2002; Maurer 2004) and Catoni (2007) Thm 1.2.6 (number from
// memory), evaluated independently in Python (/usr/bin/python3, kl inverse by
// bisection): m = 1e4, KL = 500, Gibbs R_emp = 0.03, delta = 0.05.
TEST(PacBayesTest, WorkedValues) {
  const PacBayesEvidence e = Gibbs(500, 0.03, 10000);
  EXPECT_NEAR(PacBayesMcAllester(e, 0.05).risk_upper_bound, 0.190348, 5e-7);  // McAllester 2003
  EXPECT_NEAR(Classic(e, 0.05), 0.189420, 5e-7);                         // classic
  EXPECT_NEAR(PacBayesKl(e, 0.05).risk_upper_bound, 0.117601, 5e-7);          // kl
  EXPECT_NEAR(PacBayesCatoniAt(0.03, 500, 10000, 1.0, 0.05), 0.122066, 5e-7);  // Catoni C = 1
  EXPECT_NEAR(PacBayesCatoniAt(0.03, 500, 10000, 3.0, 0.05), 0.137761, 5e-7);  // Catoni C = 3
  // Relations: the classic form follows from the kl bound by Pinsker, so kl
  // is tighter; McAllester 2003's constants are never below the classic ones.
  EXPECT_LT(PacBayesKl(e, 0.05).risk_upper_bound, Classic(e, 0.05));
  EXPECT_GE(PacBayesMcAllester(e, 0.05).risk_upper_bound, Classic(e, 0.05));
  // The grid (each C at delta/9) contains C = 1 and C = 2; its minimum is at
  // most the C = 1 value at delta/9 (brute force over the grid).
  const Certificate cat = PacBayesCatoni(e, 0.05);
  EXPECT_LE(cat.risk_upper_bound, PacBayesCatoniAt(0.03, 500, 10000, 1.0, 0.05 / 9) + 1e-15);
  EXPECT_THAT(cat.notes, Contains(HasSubstr("C in {0.125, 0.25, 0.5, 1, 2, 4, 8, 16, 32}")));
}

// Source: scipy fixture pac_bayes.csv (closed forms; kl inverse by brentq;
// Catoni minimum over the same fixed grid at delta/9), for both targets:
// the majority vote is min(1, 2 x Gibbs) (Markov's inequality; Langford &
// Shawe-Taylor 2002; Germain et al. 2015).
TEST(PacBayesTest, MatchesScipyFixture) {
  int rows = 0;
  for (const auto& row : ReadFixture("pac_bayes.csv")) {
    PacBayesEvidence e = Gibbs(Num(row, "kl_divergence"), Num(row, "gibbs_empirical_risk"),
                               static_cast<std::uint64_t>(Num(row, "samples")));
    const double delta = Num(row, "delta");
    SCOPED_TRACE(::testing::Message() << "m=" << e.sample_count << " KL=" << e.kl_divergence
                                      << " R=" << e.gibbs_empirical_risk << " d=" << delta);
    const double want_mca = Num(row, "mcallester");
    const double want_kl = Num(row, "kl_upper");
    const double want_cat = Num(row, "catoni");
    const Certificate mca = PacBayesMcAllester(e, delta);
    const Certificate kl = PacBayesKl(e, delta);
    const Certificate cat = PacBayesCatoni(e, delta);
    EXPECT_NEAR(mca.risk_upper_bound, want_mca, 1e-9 * want_mca);
    // kl: numeric.h bisects to an absolute 1e-12 (conservative end).
    EXPECT_NEAR(kl.risk_upper_bound, want_kl, std::max(1e-9 * want_kl, 2e-12));
    // Conservative side: never below the outside root by more than the two
    // root finders' own evaluation noise of kl near q (~1e-15 relative at
    // m = 1e15; 1e-13 absolute covers it).
    EXPECT_GE(kl.risk_upper_bound, want_kl - 1e-13);
    ASSERT_TRUE(kl.risk_lower_bound.has_value());
    EXPECT_NEAR(*kl.risk_lower_bound, Num(row, "kl_lower"), 2e-12);
    EXPECT_NEAR(cat.risk_upper_bound, want_cat, 1e-9 * want_cat);
    EXPECT_THAT(cat.notes,
                Contains(HasSubstr(absl::StrFormat("at C = %g", Num(row, "catoni_best_c")))));
    for (const Certificate* c : {&mca, &kl, &cat}) {
      EXPECT_TRUE(std::isfinite(c->risk_upper_bound));
      EXPECT_GE(c->risk_upper_bound, e.gibbs_empirical_risk);
      EXPECT_LE(c->risk_upper_bound, 1.0);
      EXPECT_EQ(c->vacuous, c->risk_upper_bound >= 1.0);
      EXPECT_THAT(c->notes, Contains(HasSubstr("Gibbs")));
    }
    // Orderings (Pinsker; McAllester 2003): kl <= classic <= McAllester 2003 (the
    // 2 sqrt(m) form needs m >= 8; McAllester >= classic always).
    if (e.sample_count >= 8) {
      EXPECT_LE(kl.risk_upper_bound, std::min(1.0, Classic(e, delta)) + 2e-12);
    }
    EXPECT_LE(std::min(1.0, Classic(e, delta)), mca.risk_upper_bound + 1e-15);

    e.target = PacBayesTarget::kMajorityVote;
    const Certificate mv_mca = PacBayesMcAllester(e, delta);
    const Certificate mv_kl = PacBayesKl(e, delta);
    const Certificate mv_cat = PacBayesCatoni(e, delta);
    EXPECT_NEAR(mv_mca.risk_upper_bound, std::min(1.0, 2 * want_mca), 2e-9 * want_mca);
    EXPECT_NEAR(mv_kl.risk_upper_bound, std::min(1.0, 2 * want_kl), std::max(2e-9 * want_kl, 4e-12));
    EXPECT_NEAR(mv_cat.risk_upper_bound, std::min(1.0, 2 * want_cat), 2e-9 * want_cat);
    for (const Certificate* c : {&mv_mca, &mv_kl, &mv_cat}) {
      EXPECT_FALSE(c->risk_lower_bound.has_value());
      EXPECT_THAT(c->notes, Contains(HasSubstr("majority vote")));
      EXPECT_LE(c->risk_upper_bound, 1.0);
    }
    ++rows;
  }
  EXPECT_GE(rows, 300);
}

// Seeger's ln((m+1)/delta) below m = 8 (Seeger 2002; Maurer 2004 needs m >= 8), with a
// note; Maurer's 2 sqrt(m) from m = 8 on, without one.
TEST(PacBayesTest, SmallSampleUsesSeegerForm) {
  const Certificate small = PacBayesKl(Gibbs(1.0, 0.0, 7), 0.05);
  EXPECT_THAT(small.notes, Contains(HasSubstr("Seeger")));
  // Source: kl^{-1}_+(0, c) = 1 - exp(-c) (closed form: kl(0||p) = -ln(1 - p)).
  EXPECT_NEAR(small.risk_upper_bound, -std::expm1(-(1.0 + std::log(8 / 0.05)) / 7), 1e-15);
  const Certificate eight = PacBayesKl(Gibbs(1.0, 0.0, 8), 0.05);
  EXPECT_THAT(eight.notes, Not(Contains(HasSubstr("Seeger"))));
  EXPECT_NEAR(eight.risk_upper_bound,
              -std::expm1(-(1.0 + std::log(2 * std::sqrt(8.0) / 0.05)) / 8), 1e-15);
}

// Edge cases (common practice): KL = 0, R_emp 0 or 1, m = 1, m = 1e15, huge
// KL, delta 1e-300 and 1 - 1e-12: finite, in [R_emp, 1], never NaN.
TEST(PacBayesTest, EdgeCasesAreFinite) {
  for (double delta : {1e-300, 1e-12, 0.05, 1 - 1e-12}) {
    for (std::uint64_t m : {1ULL, 2ULL, 8ULL, 1'000'000'000'000'000ULL}) {
      for (double kl : {0.0, 1e-300, 3.0, 1e300, 1.7976931348623157e308}) {
        for (double risk : {0.0, 1e-12, 0.5, 1.0}) {
          for (PacBayesTarget t : {PacBayesTarget::kGibbs, PacBayesTarget::kMajorityVote}) {
            PacBayesEvidence e = Gibbs(kl, risk, m);
            e.target = t;
            SCOPED_TRACE(::testing::Message() << "d=" << delta << " m=" << m << " kl=" << kl
                                              << " r=" << risk);
            for (const Certificate& c : {PacBayesMcAllester(e, delta), PacBayesKl(e, delta),
                                         PacBayesCatoni(e, delta)}) {
              EXPECT_TRUE(std::isfinite(c.risk_upper_bound));
              EXPECT_TRUE(std::isfinite(c.penalty));
              EXPECT_GE(c.risk_upper_bound, risk);
              EXPECT_LE(c.risk_upper_bound, 1.0);
              if (c.risk_lower_bound) {
                EXPECT_TRUE(std::isfinite(*c.risk_lower_bound));
                EXPECT_LE(*c.risk_lower_bound, risk);
              }
              if (risk == 1.0) {
                EXPECT_EQ(c.risk_upper_bound, 1.0);
              }
            }
          }
        }
      }
    }
  }
  // KL = 0 and R_emp = 0 at m = 1e15: Catoni's bound tends to
  // ln(9/delta) / (m (1 - e^-C)) at C = 32 (Catoni 2007, Thm 1.2.6 by hand).
  const double m = 1e15;
  const Certificate c = PacBayesCatoni(Gibbs(0.0, 0.0, 1'000'000'000'000'000ULL), 0.05);
  EXPECT_NEAR(c.risk_upper_bound, -std::expm1(-std::log(9 / 0.05) / m) / -std::expm1(-32.0),
              1e-9 * c.risk_upper_bound);
}

}  // namespace
}  // namespace riskbound::core
