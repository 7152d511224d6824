// The long run of the re-run soundness check (issue 15): prints the Markdown
// section "Re-running the gate on a growing hold-out set" of REPORT.md.
//   ./build/tests/soundness/riskbound_sequential_report --trials 100000 --seed 20240611
// (a minute or two). The fast variant is sequential_test.
#include <cstdint>
#include <cstdlib>
#include <iostream>
#include <string>
#include <tuple>

#include "absl/strings/str_format.h"
#include "service/core/anytime.h"
#include "service/core/numeric.h"
#include "tests/soundness/sequential.h"

namespace rs = riskbound::soundness;
namespace core = riskbound::core;

namespace {

void Row(double p, std::uint64_t batch, std::uint64_t runs, rs::WrongVerdict wrong,
         std::int64_t trials, std::uint64_t seed) {
  std::string cells =
      absl::StrFormat("| %.4f | %s | %lu x %lu |", p,
                      wrong == rs::WrongVerdict::kPromote ? "PROMOTE" : "REJECT", batch, runs);
  for (rs::RerunBound b : {rs::RerunBound::kFixedClopperPearson, rs::RerunBound::kAnytime}) {
    rs::RerunSetup s;
    s.true_error = p;
    s.batch = batch;
    s.runs = runs;
    s.bound = b;
    s.wrong = wrong;
    const rs::RerunResult r = rs::RunRerun(s, trials, seed);
    const std::string verdict = r.exact <= s.share ? "keeps" : "breaks";
    if (trials > 0) {
      cells += absl::StrFormat(" %.4f | %.4f ± %.4f | %s |", r.exact, r.simulated, r.standard_error,
                               verdict);
    } else {
      cells += absl::StrFormat(" %.4f | - | %s |", r.exact, verdict);
    }
  }
  std::cout << cells << "\n" << std::flush;
}

}  // namespace

int main(int argc, char** argv) {
  std::int64_t trials = 100000;
  std::uint64_t seed = 20240611;
  for (int i = 1; i + 1 < argc; i += 2) {
    const std::string flag = argv[i];
    if (flag == "--trials")
      trials = std::atoll(argv[i + 1]);
    else if (flag == "--seed")
      seed = std::strtoull(argv[i + 1], nullptr, 10);
    else {
      std::cerr << "usage: riskbound_sequential_report [--trials N] [--seed S]\n";
      return 2;
    }
  }
  std::cout << "## Re-running the gate on a growing hold-out set (sequential mode)\n\n"
            << "Produced by `./build/tests/soundness/riskbound_sequential_report --trials "
            << trials << " --seed " << seed
            << "` (source tests/soundness/sequential_report.cc; the fast variant is the ctest "
               "sequential_test).\n\n"
            << "The workflow of issue 15: policy max_risk 0.05, failure_probability 0.05, no "
               "champion, so each risk bound gets 0.025. The hold-out set grows by a batch "
               "before each run; the gate is re-run on the whole grown set every time. For a "
               "true error at or just above max_risk a PROMOTE at any run is wrong (the promise: "
               "probability <= 0.025); for one at or below it, a REJECT at any run is. "
               "'exact' is brute force (dynamic programming over the error count with the "
               "Boost.Math binomial pmf, mass below 1e-18 counted as wrong); 'simulated' is "
               "Monte-Carlo over T = "
            << trials
            << " paths (std::mt19937_64; each batch's error count by inversion of its "
               "Boost.Math binomial CDF, because libstdc++'s std::binomial_distribution is "
               "biased at these parameters), ± one standard error; '-' where only the exact value "
               "is computed (10^4 looks or more per path). The thresholds are the gate's own "
               "decisions (the largest error count whose upper limit is <= max_risk, the "
               "smallest whose lower limit is > max_risk). Fixed-n is one-sided Clopper-Pearson "
               "at 0.025 each run (policy.sequential false); anytime is holdout-anytime at "
               "0.025 (policy.sequential true).\n\n"
            << "| true error | wrong verdict | batch x runs | fixed-n exact | fixed-n simulated "
               "| fixed-n | anytime exact | anytime simulated | anytime |\n"
            << "|---:|---|---:|---:|---:|---|---:|---:|---|\n";
  const auto P = rs::WrongVerdict::kPromote;
  const auto R = rs::WrongVerdict::kReject;
  // The rows of issue 15's table.
  Row(0.0505, 1000, 1, P, trials, seed);
  Row(0.0505, 1000, 5, P, trials, seed);
  Row(0.0505, 1000, 20, P, trials, seed);
  Row(0.0505, 250, 80, P, trials, seed);
  Row(0.052, 250, 80, P, trials, seed);
  Row(0.05, 250, 80, P, trials, seed);
  Row(0.05, 250, 80, R, trials, seed);
  Row(0.0495, 250, 80, R, trials, seed);
  // 10^4 looks per path and more.
  Row(0.05, 1, 10000, P, 0, seed);
  Row(0.0505, 1, 10000, P, 0, seed);
  Row(0.0505, 10, 10000, P, 0, seed);
  Row(0.052, 10, 10000, P, 0, seed);
  Row(0.05, 10, 10000, R, 0, seed);
  Row(0.0495, 10, 10000, R, 0, seed);
  Row(0.0505, 100, 10000, P, 0, seed);

  std::cout << "\nThe champion comparison under re-runs (Monte-Carlo over T = " << trials / 5
            << " paths; each sample only-the-candidate-wrong or only-the-champion-wrong at the "
               "rates shown; a wrong pass is DU <= max_regression = 0 at some run, where DU is "
               "the gate's pair: upper limit on the first rate minus lower limit on the second, "
               "each at half the difference share 0.0125; the promise is <= 0.0125):\n\n"
            << "| rates (candidate only, champion only) | batch x runs | fixed-n pair | anytime "
               "pair |\n"
            << "|---|---:|---:|---:|\n";
  for (const auto& [pb, pc, batch, runs] :
       {std::tuple<double, double, std::uint64_t, std::uint64_t>{0.01, 0.01, 250, 80},
        {0.0105, 0.01, 250, 80},
        {0.01, 0.01, 100, 400}}) {
    std::string cells = absl::StrFormat("| %.4f, %.4f | %lu x %lu |", pb, pc, batch, runs);
    for (rs::RerunBound b : {rs::RerunBound::kFixedClopperPearson, rs::RerunBound::kAnytime}) {
      rs::PairedRerunSetup s;
      s.only_challenger_rate = pb;
      s.only_champion_rate = pc;
      s.batch = batch;
      s.runs = runs;
      s.bound = b;
      const rs::PairedRerunResult r = rs::RunPairedRerun(s, trials / 5, seed);
      cells += absl::StrFormat(" %.4f ± %.4f |", r.simulated, r.standard_error);
    }
    std::cout << cells << "\n" << std::flush;
  }

  std::cout << "\nWidth of the upper bound above the observed rate 0.05, anytime "
               "(holdout-anytime) over fixed-n (Clopper-Pearson), same failure "
               "probability:\n\n"
            << "| n | delta | Clopper-Pearson upper | anytime upper | width ratio |\n"
            << "|---:|---:|---:|---:|---:|\n";
  for (double delta : {0.025, 0.05}) {
    for (std::uint64_t n : {100u, 1000u, 10000u, 100000u}) {
      const std::uint64_t k = n / 20;
      const double cp = core::BinomialUpperLimit(n, k, delta).value;
      const double any = core::AnytimeUpperLimit(n, k, delta).value;
      std::cout << absl::StrFormat("| %lu | %g | %.6f | %.6f | %.2f |\n", n, delta, cp, any,
                                   (any - 0.05) / (cp - 0.05));
    }
  }
  std::cout << "\nReading: with fixed-n bounds the chance of a wrong PROMOTE (or REJECT) grows "
               "with the number of runs, far past its share; with the anytime bounds it stays "
               "below the share however many runs there are (Ville 1939). The price is width: "
               "about the ratios above.\n";
  return 0;
}
