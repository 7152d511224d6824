// Fast variant (ctest) of the re-run soundness check of issue 15
// (tests/soundness/sequential.h; the long run is sequential_report.cc and
// its figures are in REPORT.md). The policy: max_risk 0.05, delta 0.05, so
// each risk bound gets 0.025.
#include <cmath>
#include <iostream>

#include "absl/strings/str_format.h"
#include "gtest/gtest.h"
#include "tests/soundness/sequential.h"

namespace riskbound::soundness {
namespace {

constexpr std::int64_t kFastTrials = 2000;
constexpr std::uint64_t kSeed = 20240611;

RerunResult RunCase(double p, std::uint64_t batch, std::uint64_t runs, RerunBound bound,
                    WrongVerdict wrong, std::int64_t trials = kFastTrials) {
  RerunSetup s;
  s.true_error = p;
  s.batch = batch;
  s.runs = runs;
  s.bound = bound;
  s.wrong = wrong;
  const RerunResult r = RunRerun(s, trials, kSeed);
  std::cout << absl::StrFormat("p=%.4f %lu x %lu %s %s: exact %.5f, simulated %.5f (+- %.5f)\n", p,
                               batch, runs, BoundName(bound),
                               wrong == WrongVerdict::kPromote ? "PROMOTE" : "REJECT", r.exact,
                               r.simulated, r.standard_error);
  // The two computations agree: the hit count is Bin(trials, exact), so
  // within 4 of its standard deviations (plus one hit).
  if (trials > 0) {
    const double t = static_cast<double>(trials);
    EXPECT_NEAR(r.simulated, r.exact, 4 * std::sqrt(r.exact * (1 - r.exact) / t) + 1 / t);
  }
  return r;
}

// Source: brute force (exact dynamic programming over the error count, Boost.Math
// binomial pmf) and Monte-Carlo; the promise is Ville's inequality (Ville 1939).
TEST(SequentialSoundnessTest, AnytimeBoundsKeepThePromiseOverReruns) {
  for (double p : {0.05, 0.0505, 0.052}) {
    const RerunResult r = RunCase(p, 250, 80, RerunBound::kAnytime, WrongVerdict::kPromote);
    EXPECT_LE(r.exact, 0.025);
    EXPECT_LE(r.simulated, 0.025 + 3 * r.standard_error);
  }
  // 10^4 looks per path: a re-run after every single labelled sample.
  const RerunResult every =
      RunCase(0.05, 1, 10000, RerunBound::kAnytime, WrongVerdict::kPromote, 0);
  EXPECT_LE(every.exact, 0.025);
  for (double p : {0.05, 0.0495}) {
    const RerunResult r = RunCase(p, 250, 80, RerunBound::kAnytime, WrongVerdict::kReject);
    EXPECT_LE(r.exact, 0.025);
    EXPECT_LE(r.simulated, 0.025 + 3 * r.standard_error);
  }
}

// The same workflow with fixed-size bounds breaks the promise: the check
// above can fail. Source: issue 15's table (Monte-Carlo, 250 x 80 at 0.0505:
// 0.124; 1000 x 1: 0.018), reproduced here exactly.
TEST(SequentialSoundnessTest, FixedSizeBoundsInflateOverReruns) {
  const RerunResult one =
      RunCase(0.0505, 1000, 1, RerunBound::kFixedClopperPearson, WrongVerdict::kPromote);
  EXPECT_LE(one.exact, 0.025);  // one look: the promise holds
  const RerunResult many =
      RunCase(0.0505, 250, 80, RerunBound::kFixedClopperPearson, WrongVerdict::kPromote);
  EXPECT_GT(many.exact, 0.1);
  EXPECT_NEAR(many.exact, 0.124, 0.01);
  EXPECT_GT(many.simulated, 0.025 + 3 * many.standard_error);
  const RerunResult reject =
      RunCase(0.05, 250, 80, RerunBound::kFixedClopperPearson, WrongVerdict::kReject);
  EXPECT_GT(reject.exact, 0.05);
}

// The champion comparison re-run as the shared set grows, the candidate
// exactly as good as the tolerance allows (true difference 0 = tolerance):
// the chance of a pass at some run stays under the difference share
// delta/4 = 0.0125 with anytime limits (union bound over the two one-sided
// sequences, Ville 1939). Source: Monte-Carlo. The fixed-n pair is printed
// beside: it is conservative (two one-sided limits at delta/8 each), so its
// inflation needs more runs to show (REPORT.md).
TEST(SequentialSoundnessTest, PairedComparisonOverReruns) {
  PairedRerunSetup s;
  s.only_challenger_rate = 0.01;
  s.only_champion_rate = 0.01;
  s.batch = 500;
  s.runs = 20;
  const PairedRerunResult any = RunPairedRerun(s, 1000, kSeed);
  std::cout << absl::StrFormat("paired anytime: %.4f +- %.4f\n", any.simulated, any.standard_error);
  EXPECT_LE(any.simulated, 0.0125 + 3 * any.standard_error);
  s.bound = RerunBound::kFixedClopperPearson;
  const PairedRerunResult fixed = RunPairedRerun(s, 1000, kSeed);
  std::cout << absl::StrFormat("paired fixed-n: %.4f +- %.4f\n", fixed.simulated,
                               fixed.standard_error);
}

}  // namespace
}  // namespace riskbound::soundness
