// riskbound_soundness: the full-mode Monte-Carlo soundness run. Runs every
// registered scenario (simulate.h) at --trials simulated datasets per family
// (default 100000) and the exact worst-case scans of the hold-out families,
// and writes a Markdown report whose first lines give the exact command.
//
// Usage: riskbound_soundness [--trials N] [--seed S] [--out FILE]
// Exit status: 0 when every row passes CheckRow, 1 when one fails, 2 on a
// bad command line or an unwritable --out.
#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdint>
#include <cstdlib>
#include <fstream>
#include <iostream>
#include <sstream>
#include <string>
#include <vector>

#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "absl/strings/str_join.h"
#include "tests/soundness/simulate.h"
#include "tests/soundness/slice_gate.h"
#include "tests/soundness/slice_gate_setups.h"

namespace riskbound::soundness {
namespace {

struct Options {
  std::int64_t trials = 100000;
  std::uint64_t seed = 20240611;
  std::string out;  // empty: stdout
};

bool ParseOptions(int argc, char** argv, Options* options, std::string* error) {
  for (int i = 1; i < argc; ++i) {
    const std::string flag = argv[i];
    if (flag == "--help" || flag == "-h") {
      *error = "";
      return false;
    }
    if (i + 1 >= argc) {
      *error = absl::StrCat(flag, ": missing value");
      return false;
    }
    const std::string value = argv[++i];
    if (flag == "--trials") {
      if (!absl::SimpleAtoi(value, &options->trials) || options->trials < 1) {
        *error = absl::StrCat("--trials: want a positive integer, got '", value, "'");
        return false;
      }
    } else if (flag == "--seed") {
      if (!absl::SimpleAtoi(value, &options->seed)) {
        *error = absl::StrCat("--seed: want a non-negative integer, got '", value, "'");
        return false;
      }
    } else if (flag == "--out") {
      options->out = value;
    } else {
      *error = absl::StrCat("unknown flag ", flag);
      return false;
    }
  }
  return true;
}

std::string Escape(std::string s) {
  std::string out;
  for (char c : s) {
    if (c == '|') out += "\\|";
    else out += c;
  }
  return out;
}

void WriteTable(std::ostream& md, const std::vector<CoverageRow>& rows, int* failures) {
  md << "| scenario | family | must cover | T | delta | true risk | mean bound | coverage "
        "| floor | exact coverage | reference | result |\n";
  md << "|---|---|---|---:|---:|---:|---:|---:|---:|---:|---|---|\n";
  std::vector<std::string> notes;
  for (const CoverageRow& r : rows) {
    const std::vector<std::string> fails = CheckRow(r);
    *failures += static_cast<int>(fails.size());
    std::string reference;
    if (r.reference_value.has_value()) {
      reference = absl::StrFormat("%.4f (%s)", *r.reference_value, r.reference_source);
    }
    md << absl::StrFormat("| %s | %s | %s | %d | %g | %.4f | %.4f | %.5f | %.5f | %s | %s | %s |\n",
                          Escape(r.scenario), Escape(r.family), Escape(r.target), r.trials,
                          r.delta, r.mean_true_risk, r.mean_bound, r.coverage, r.floor,
                          r.exact_coverage ? absl::StrFormat("%.6f", *r.exact_coverage) : "",
                          Escape(reference),
                          fails.empty() ? "pass" : Escape(absl::StrJoin(fails, "; ")));
    if (!r.note.empty()) {
      const std::string n = absl::StrCat(r.scenario, " / ", r.family, " / ", r.target, ": ", r.note);
      bool seen = false;
      for (const std::string& old : notes) seen = seen || old == n;
      if (!seen) notes.push_back(n);
    }
  }
  if (!notes.empty()) {
    md << "\nNotes:\n";
    for (const std::string& n : notes) md << "- " << n << "\n";
  }
}

// The slice gate section (issue 16; tests/soundness/slice_gate.h).
void WriteSliceGate(std::ostream& md, const Options& options, int* failures) {
  const auto start = std::chrono::steady_clock::now();
  md << "## slice gate (per-slice limits)\n\n"
        "G = 4 slices of 200, 500, 1000 and 3000 hold-out samples with limits "
        "(policy.slice_max_risks) 0.08, 0.05, 0.05 and 0.02; policy failure_probability 0.05, "
        "no champion, so the slices' part is 0.025, shared by Bonferroni (1936; 0.00625 "
        "each) or Sidak (1967; 1 - 0.975^(1/4) each); each slice's Clopper-Pearson upper and "
        "lower limits at half its share. The slices' counts are independent binomials at the "
        "true rates shown (which satisfies the Sidak condition). 'PROMOTE' is P(every slice "
        "CLEARS), a wrong verdict when some slice's true rate is at or above its limit (at "
        "the limit: the supremum over rates just above it); 'REJECT' is P(some slice "
        "EXCEEDS), a wrong verdict when every slice's true rate is at or below its limit. "
        "'promise': what the failed one-sided limits that can cause the wrong verdict may "
        "spend together, the sum of their shares (Bonferroni) or 1 - prod(1 - share) "
        "(Sidak); never above the slices' part 0.025. '-': that verdict is not wrong in the "
        "row. Exact: product of Boost.Math binomial CDFs over the slices (brute force); "
        "simulated: T = "
     << options.trials
     << " trials (std::mt19937_64, each count by inversion of its Boost.Math binomial CDF). "
        "Pass: exact <= promise, simulated <= promise + 3 sqrt(promise (1 - promise) / T) + "
        "1/T, and simulated within 4 standard errors of exact. The overall risk bounds (delta/4 "
        "each side here) are a separate statement with their own share, covered by the "
        "hold-out rows above; the simulated policy never lets them decide. Here the Sidak "
        "share is only about 1% larger than the Bonferroni one, too little to move any slice's "
        "thresholds, so the two rules' exact figures coincide and only their promises "
        "differ.\n\n"
        "| rule | true rates | PROMOTE exact | PROMOTE simulated | PROMOTE promise | REJECT "
        "exact | REJECT simulated | REJECT promise | result |\n"
        "|---|---|---:|---:|---:|---:|---:|---:|---|\n";
  for (const core::SliceShareRule rule :
       {core::SliceShareRule::kBonferroni, core::SliceShareRule::kSidak}) {
    for (const auto& [label, setup] : SliceGateSetups(rule)) {
      const SliceGateResult r = RunSliceGate(setup, options.trials, options.seed);
      const std::vector<std::string> fails = CheckSliceGate(r);
      *failures += static_cast<int>(fails.size());
      const double t = static_cast<double>(r.trials);
      const auto se = [&](double p) { return std::sqrt(std::max(p * (1 - p), 1 / t) / t); };
      md << absl::StrFormat(
          "| %s | %s (%s) | %.6f | %.6f ± %.6f | %s | %.6f | %.6f ± %.6f | %s | %s |\n",
          core::SliceShareRuleName(rule), label,
          absl::StrJoin(setup.true_rates, ", ",
                        [](std::string* out, double v) { absl::StrAppend(out, v); }),
          r.exact_promote, r.simulated_promote, se(r.simulated_promote),
          r.promote_is_wrong ? absl::StrFormat("%.6f", r.promote_promise) : "-", r.exact_reject,
          r.simulated_reject, se(r.simulated_reject),
          r.reject_is_wrong ? absl::StrFormat("%.6f", r.reject_promise) : "-",
          fails.empty() ? "pass" : Escape(absl::StrJoin(fails, "; ")));
    }
  }
  md << "\nSequential mode (policy.sequential: anytime-valid slice bounds, holdout-anytime): "
        "the gate re-run 20 times as every slice grows by 1/20 of its size (10, 25, 50 and "
        "150 samples per run). 'REJECT ever': every slice at its limit, P(some slice EXCEEDS "
        "at some run); 'clears ever': every slice at 1.05 x its limit, P(some slice CLEARS at "
        "some run), an upper bound on a wrong PROMOTE at some run. Exact, by dynamic "
        "programming per slice (the sequential section's ExactEverWrong), combined over the "
        "independent slices; fixed-n Clopper-Pearson slice bounds beside for contrast.\n\n"
        "| rule | REJECT ever, anytime | fixed-n | promise | clears ever, anytime | fixed-n | "
        "promise | result |\n"
        "|---|---:|---:|---:|---:|---:|---:|---|\n";
  for (const core::SliceShareRule rule :
       {core::SliceShareRule::kBonferroni, core::SliceShareRule::kSidak}) {
    SliceGateSetup s = SliceGateSetups(rule)[0].second;
    for (std::size_t j = 0; j < s.true_rates.size(); ++j) s.true_rates[j] = 1.05 * s.limits[j];
    const SequentialSliceResult r = RunSequentialSlices(s, 20);
    const bool pass =
        r.reject_ever <= r.reject_promise && r.promote_ever_bound <= r.promote_promise;
    if (!pass) ++*failures;
    md << absl::StrFormat("| %s | %.6f | %.6f | %.6f | %.6f | %.6f | %.6f | %s |\n",
                          core::SliceShareRuleName(rule), r.reject_ever, r.fixed_reject_ever,
                          r.reject_promise, r.promote_ever_bound, r.fixed_promote_ever_bound,
                          r.promote_promise, pass ? "pass" : "FAILS the promise");
  }
  md << absl::StrFormat(
      "\nRuntime: %.1f s.\n\n",
      std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count());
}

int Run(int argc, char** argv) {
  Options options;
  std::string error;
  if (!ParseOptions(argc, argv, &options, &error)) {
    if (!error.empty()) std::cerr << "riskbound_soundness: " << error << "\n";
    std::cerr << "usage: riskbound_soundness [--trials N (default 100000)] [--seed S] "
                 "[--out FILE.md]\n";
    return 2;
  }
  std::vector<std::string> args(argv, argv + argc);
  std::ostringstream md;
  md << "# Monte-Carlo soundness report\n\n";
  md << "Produced by (run from the repository root):\n\n```\n" << absl::StrJoin(args, " ")
     << "\n```\n\n";
  md << "The binary is built by `./scripts/build riskbound_soundness` (into "
        "build/tests/soundness/; source tests/soundness/soundness_report.cc). The fast variant of the same scenarios runs in "
        "ctest as soundness_test.\n\n";
  md << absl::StrFormat(
      "Trials per family T = %d, seed %d (std::mt19937_64 through std::seed_seq, one stream "
      "per setup). Each row simulates T datasets at a KNOWN true risk, computes riskbound's "
      "certificate on each with the core functions (or core::Certify), and counts how often "
      "the upper bound covers the true risk.\n\n",
      options.trials, options.seed);
  md << "Pass criteria (tests/soundness/simulate.h, CheckRow):\n\n"
        "- coverage >= floor = 1 - delta - 3 sqrt(delta (1 - delta) / T) (three Monte-Carlo "
        "standard errors below 1 - delta);\n"
        "- where the evidence is a single binomial count, the exact coverage "
        "sum_k P(Bin(n,p)=k) 1[bound(k) >= p] (Boost.Math pmf) is >= 1 - delta, the "
        "simulation agrees with it within 4 standard errors, and it equals an independent "
        "computation of the same sum (scipy.stats.binom.pmf, Debian's scipy) "
        "to its 4 printed decimals.\n"
        "- Monte-Carlo references from an independent Python simulation are shown for "
        "information only: they come from a different random stream and fewer trials.\n\n"
        "Columns: 'true risk' and 'mean bound' are means over the T trials (the true risk "
        "varies from trial to trial when the classifier is chosen from the data); 'must cover' "
        "says which classifier's true risk the bound has to cover.\n\n";

  int failures = 0;
  const auto start_all = std::chrono::steady_clock::now();
  for (const Scenario& s : Scenarios()) {
    const auto start = std::chrono::steady_clock::now();
    const std::vector<CoverageRow> rows = s.run(options.trials, options.seed);
    const double seconds =
        std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
    md << "## " << s.name << "\n\n";
    WriteTable(md, rows, &failures);
    md << absl::StrFormat("\nRuntime: %.1f s.\n\n", seconds);
    std::cerr << absl::StrFormat("%s: %d rows, %.1f s\n", s.name, rows.size(), seconds);
  }

  WriteSliceGate(md, options, &failures);

  md << "## hold-out exact worst case over the true risk\n\n"
        "No simulation: for each n and delta, the exact coverage is evaluated at a regular "
        "grid of p and just above every bound value b(k) (where the coverage function jumps "
        "down), and the minimum is reported; 'true risk' is the worst p and 'mean bound' the "
        "bound value it sits above.\n\n";
  std::vector<CoverageRow> scan;
  const auto start = std::chrono::steady_clock::now();
  for (const std::uint64_t n : {10ULL, 57ULL, 200ULL, 1000ULL}) {
    for (const double delta : {0.05, 0.01}) {
      for (CoverageRow& r : ExactHoldoutScan(n, delta, 400)) scan.push_back(std::move(r));
    }
  }
  WriteTable(md, scan, &failures);
  md << absl::StrFormat(
      "\nRuntime: %.1f s.\n\n",
      std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count());
  const double total =
      std::chrono::duration<double>(std::chrono::steady_clock::now() - start_all).count();
  md << absl::StrFormat("## Summary\n\n%s. Total runtime %.0f s.\n",
                        failures == 0 ? "Every row passes"
                                      : absl::StrFormat("%d failed criteria", failures),
                        total);

  if (options.out.empty()) {
    std::cout << md.str();
  } else {
    std::ofstream out(options.out);
    if (!out) {
      std::cerr << "riskbound_soundness: cannot write " << options.out << "\n";
      return 2;
    }
    out << md.str();
  }
  std::cerr << (failures == 0 ? "all rows pass\n" : "FAILED criteria: see the report\n");
  return failures == 0 ? 0 : 1;
}

}  // namespace
}  // namespace riskbound::soundness

int main(int argc, char** argv) { return riskbound::soundness::Run(argc, argv); }
