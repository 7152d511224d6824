// Worst admissible inputs per core entry point (docs/performance.md, section
// "Worst-case CPU per call").
//
// Every figure that matters is a ratio against a baseline measured in the
// same run: the recommended hold-out Certify (5 000 samples, 212 errors).
// - BM_Worst/<case>: counter x_baseline = CPU time per call / baseline CPU
//   time per call; counter cpu_ms = CPU milliseconds per call (for the table
//   in the docs, read on the machine at hand).
// - After the benchmarks, a plain table: one row per case with the CPU time
//   of a single call (thread CPU clock) and the same ratio.
// The inputs are the slowest found by sweeping counts up to 2^53, failure
// probabilities down to 1e-300, targets next to the expected rate and pass
// probabilities next to 1 (see the docs for the sweep).
#include <time.h>

#include <cstdint>
#include <cstdio>
#include <functional>
#include <optional>
#include <string>
#include <vector>

#include "benchmark/benchmark.h"
#include "service/core/capacity.h"
#include "service/core/certify.h"
#include "service/core/gate.h"
#include "service/core/plan.h"
#include "service/core/select.h"

namespace {

using namespace riskbound::core;  // NOLINT: a benchmark of the core's API

constexpr std::uint64_t kTwoTo53 = 1ULL << 53;

double ThreadCpuSeconds() {
  timespec ts;
  clock_gettime(CLOCK_THREAD_CPUTIME_ID, &ts);
  return static_cast<double>(ts.tv_sec) + 1e-9 * static_cast<double>(ts.tv_nsec);
}

// CPU seconds per call of fn over `calls` calls.
double CpuPerCall(int calls, const std::function<void()>& fn) {
  const double start = ThreadCpuSeconds();
  for (int i = 0; i < calls; ++i) fn();
  return (ThreadCpuSeconds() - start) / calls;
}

// The baseline: the recommended hold-out Certify.
void Baseline() {
  CertifyRequest req;
  req.evidence.holdout = SampleCounts{212, 5000};
  benchmark::DoNotOptimize(Certify(req));
}

double BaselineSeconds() { return CpuPerCall(2000, Baseline); }

struct WorstCase {
  std::string entry_point;
  std::string input;
  std::function<void()> run;
};

// The gate on a rate a hair below max_risk with a paired champion at 0.999999
// pass probability: HOLD plans for the risk and the comparison (fixed-n or
// sequential limits).
void HairBelowWithChampion(bool sequential) {
  GatePolicy policy;
  policy.sequential = sequential;
  policy.plan_pass_probability = 0.999999;
  GateCandidate c;
  c.id = "candidate";
  c.evidence.holdout = SampleCounts{49'999, 1'000'000};
  ChampionComparison champion;
  champion.champion_id = "champion";
  champion.paired = PairedCounts{25'000, 25'001, 24'999, 1'000'000};
  benchmark::DoNotOptimize(DecideGate(policy, c, champion));
}

std::vector<WorstCase> Cases() {
  std::vector<WorstCase> cases;
  cases.push_back({"Certify", "sample compression, 10^8 outside examples, 10^7 errors",
                   [] {
                     CertifyRequest req;
                     req.evidence.compression =
                         CompressionEvidence{100'001'000, 1'000, 10'000'000, false};
                     benchmark::DoNotOptimize(Certify(req));
                   }});
  cases.push_back({"Certify",
                   "all applicable families, n = 2^53, half errors, delta = 1e-300",
                   [] {
                     CertifyRequest req;
                     req.failure_probability = 1e-300;
                     req.family_choice = FamilyChoice::kAllApplicable;
                     const std::uint64_t n = kTwoTo53;
                     req.evidence.holdout = SampleCounts{n / 2, n};
                     TrainingEvidence t;
                     t.error_count = n / 2;
                     t.sample_count = n;
                     t.capacity.vc_dimension = n / 2;
                     t.capacity.log_hypothesis_count = 1e6;
                     req.evidence.training = t;
                     req.evidence.bounded_loss = BoundedLossEvidence{0.5, 0.1, n, 0.0, 1.0};
                     req.evidence.pac_bayes = PacBayesEvidence{10.0, 0.5, n};
                     req.evidence.rademacher = RademacherEvidence{{n / 2, n}, 0.1, 0};
                     req.evidence.compression =
                         CompressionEvidence{n, n / 1000, n / 2000, false};
                     benchmark::DoNotOptimize(Certify(req));
                   }});
  cases.push_back({"Certify",
                   "hold-out binomial, n = 2^53, half errors, delta = the smallest positive "
                   "double (quadrature and post-check)",
                   [] {
                     CertifyRequest req;
                     req.failure_probability = 4.9406564584124654e-324;
                     req.evidence.holdout = SampleCounts{kTwoTo53 / 2, kTwoTo53};
                     benchmark::DoNotOptimize(Certify(req));
                   }});
  cases.push_back({"Certify",
                   "hold-out binomial, n = 10^9, 10^8 errors, delta = 0.5 (Boost at its caps)",
                   [] {
                     CertifyRequest req;
                     req.failure_probability = 0.5;
                     req.evidence.holdout = SampleCounts{100'000'000, 1'000'000'000};
                     benchmark::DoNotOptimize(Certify(req));
                   }});
  cases.push_back({"SelectStructure", "10 000 candidates, occam-kl, n = 2^53, delta = 1e-300",
                   [] {
                     SelectRequest req;
                     req.family = Family::kOccamKl;
                     req.failure_probability = 1e-300;
                     req.delta_spread = DeltaSpread::kUniform;
                     for (int i = 0; i < 10000; ++i) {
                       StructureCandidate c;
                       c.id = "c" + std::to_string(i);
                       c.error_count = kTwoTo53 / 3;
  c.sample_count = kTwoTo53;
                       c.capacity.log_hypothesis_count = 1000.0 * i;
                       req.structure.push_back(c);
                     }
                     benchmark::DoNotOptimize(SelectStructure(req));
                   }});
  cases.push_back({"PlanHoldout",
                   "target 0.001, expected rate 0.000999999, pass probability 0.999",
                   [] {
                     HoldoutPlanRequest req;
                     req.target_risk = 0.001;
                     req.expected_risk = 0.000999999;
                     req.pass_probability = 0.999;
                     benchmark::DoNotOptimize(PlanHoldout(req));
                   }});
  cases.push_back({"PlanHoldout",
                   "target 0.3, expected rate 0.29999997, pass probability 0.5 (answer "
                   "6.3e14, exact tails at every step)",
                   [] {
                     HoldoutPlanRequest req;
                     req.target_risk = 0.3;
                     req.expected_risk = 0.29999997;
                     req.pass_probability = 0.5;
                     benchmark::DoNotOptimize(PlanHoldout(req));
                   }});
  cases.push_back({"PlanTraining",
                   "occam-kl, ln|H| = 1, target 0.5, expected rate 0.4999995, delta = 1e-300",
                   [] {
                     TrainingPlanRequest req;
                     req.family = Family::kOccamKl;
                     req.capacity.log_hypothesis_count = 1.0;
                     req.target_risk = 0.5;
                     req.expected_empirical_risk = 0.4999995;
                     req.failure_probability = 1e-300;
                     benchmark::DoNotOptimize(PlanTraining(req));
                   }});
  cases.push_back({"DecideGate",
                   "hold-out rate a hair above max_risk at n = 10^6 (REJECT plan), 3 families",
                   [] {
                     GatePolicy policy;
                     policy.allowed_families = {Family::kHoldoutExactBinomial,
                                                Family::kHoldoutKlChernoff,
                                                Family::kVcAdditive};
                     GateCandidate c;
                     c.id = "candidate";
                     c.evidence.holdout = SampleCounts{50'001, 1'000'000};
                     c.evidence.training = TrainingEvidence{{50'001, 1'000'000}, {}};
                     c.evidence.training->capacity.vc_dimension = 10;
                     benchmark::DoNotOptimize(DecideGate(policy, c, std::nullopt));
                   }});
  cases.push_back({"DecideGate",
                   "paired champion, rate a hair below max_risk (HOLD plan), pass 0.999999",
                   [] { HairBelowWithChampion(false); }});
  cases.push_back({"DecideGate",
                   "n = 10^15, rate 0.0500001, delta = 1e-300, paired champion at the "
                   "tolerance (REJECT plan over budget, McNemar at 5e13 discordant)",
                   [] {
                     GatePolicy policy;
                     policy.failure_probability = 1e-300;
                     policy.allowed_families = {Family::kHoldoutExactBinomial,
                                                Family::kHoldoutKlChernoff};
                     const std::uint64_t n = 1'000'000'000'000'000ULL;
                     const std::uint64_t k = 50'000'100'000'000ULL;
                     GateCandidate c;
                     c.id = "candidate";
                     c.evidence.holdout = SampleCounts{k, n};
                     ChampionComparison champion;
                     champion.champion_id = "champion";
                     champion.paired = PairedCounts{k - k / 2, k / 2, k / 2, n};
                     benchmark::DoNotOptimize(DecideGate(policy, c, champion));
                   }});
  cases.push_back({"DecideGate",
                   "sequential mode: paired champion, rate a hair below max_risk (anytime "
                   "HOLD plans: risk over 2^40, champion over its 2 s budget), pass 0.999999",
                   [] { HairBelowWithChampion(true); }});
  cases.push_back({"DecideGate",
                   "1 000 slices (the request limit), each a hair above its limit at n = "
                   "10^6 (slice REJECT plans until the 250 ms slice budget runs out)",
                   [] {
                     GatePolicy policy;
                     policy.max_slice_risk = 0.05;
                     GateCandidate c;
                     c.id = "candidate";
                     c.evidence.holdout = SampleCounts{50'001'000, 1'000'000'000};
                     for (int i = 0; i < 1000; ++i) {
                       SliceEvidence s;
                       s.name = std::to_string(i);
                       s.error_count = 50'001;
                       s.sample_count = 1'000'000;
                       c.evidence.slices.push_back(s);
                     }
                     benchmark::DoNotOptimize(DecideGate(policy, c, std::nullopt));
                   }});
  cases.push_back({"EstimateCapacity",
                   "relu network given by 1 000 layer widths (the request limit) of 1 000",
                   [] {
                     ModelDescription m;
                     m.kind = ModelKind::kReluNetwork;
                     m.layer_widths.assign(1000, 1000);
                     m.layer_widths.back() = 1;
                     benchmark::DoNotOptimize(EstimateCapacity(m));
                   }});
  return cases;
}

void BM_Worst(benchmark::State& state, const WorstCase& c) {
  const double base = BaselineSeconds();
  const double start = ThreadCpuSeconds();
  for (auto _ : state) c.run();
  const double per = (ThreadCpuSeconds() - start) / static_cast<double>(state.iterations());
  state.counters["x_baseline"] = per / base;
  state.counters["cpu_ms"] = per * 1e3;
}

}  // namespace

int main(int argc, char** argv) {
  const std::vector<WorstCase> cases = Cases();
  for (const WorstCase& c : cases) {
    benchmark::RegisterBenchmark(("BM_Worst/" + c.entry_point + "/" + c.input).c_str(),
                                 [&c](benchmark::State& s) { BM_Worst(s, c); })
        ->Unit(benchmark::kMillisecond);
  }
  benchmark::Initialize(&argc, argv);
  if (benchmark::ReportUnrecognizedArguments(argc, argv)) return 1;
  benchmark::RunSpecifiedBenchmarks();
  benchmark::Shutdown();

  // The plain table: one call each (the first, uncached), CPU time and ratio.
  const double base = BaselineSeconds();
  std::printf("\nWorst-case CPU per call (baseline: recommended hold-out Certify, %.1f us)\n",
              base * 1e6);
  std::printf("%-17s %9s %12s  %s\n", "entry point", "CPU ms", "x baseline", "input");
  for (const WorstCase& c : cases) {
    const double t = CpuPerCall(1, c.run);
    std::printf("%-17s %9.2f %12.0f  %s\n", c.entry_point.c_str(), t * 1e3, t / base,
                c.input.c_str());
  }
  return 0;
}
