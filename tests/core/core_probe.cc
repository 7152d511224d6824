// core_probe: answers core questions read from stdin, one per line, for the
// Python tests that check the core against outside references
// (tests/reference/tail_limits_test.py with mpmath,
// tests/reference/plan_minimal_test.py with scipy). Not a test by itself.
//
//   upper N K DELTA        -> value exact cpu_us   (BinomialUpperLimit)
//   lower N K DELTA        -> value exact cpu_us   (BinomialLowerLimit)
//   upperlog N K LOGDELTA  -> value exact cpu_us   (BinomialUpperLimitLogDelta)
//   logcdf N K P           -> ln P(Bin(N, P) <= K)  (LogBinomialCdf)
//   compression M D K DELTA FIXED -> upper exact cpu_us     (SampleCompression)
//   plan EPS P DELTA [PASS] -> reachable sample_count tolerated_error_count
//                              pass_probability_at_plan cpu_us
//                              bound_evaluation_count (PlanHoldout)
// Values print with 17 significant digits; cpu_us is the calling thread's CPU
// time for the call.
#include <time.h>

#include <cmath>
#include <cstdint>
#include <cstdio>
#include <iostream>
#include <sstream>
#include <string>

#include "service/core/compression.h"
#include "service/core/numeric.h"
#include "service/core/plan.h"

namespace {

using namespace riskbound::core;  // NOLINT: a probe of the core's API

double ThreadCpuMicros() {
  timespec ts;
  clock_gettime(CLOCK_THREAD_CPUTIME_ID, &ts);
  return 1e6 * static_cast<double>(ts.tv_sec) + 1e-3 * static_cast<double>(ts.tv_nsec);
}

}  // namespace

int main() {
  std::string line;
  while (std::getline(std::cin, line)) {
    std::istringstream in(line);
    std::string what;
    in >> what;
    if (what == "upper" || what == "lower" || what == "upperlog") {
      std::uint64_t n = 0, k = 0;
      std::string level;
      in >> n >> k >> level;
      const double x = std::strtod(level.c_str(), nullptr);
      const double start = ThreadCpuMicros();
      const TailLimit t = what == "upper"   ? BinomialUpperLimit(n, k, x)
                          : what == "lower" ? BinomialLowerLimit(n, k, x)
                                            : BinomialUpperLimitLogDelta(n, k, x);
      const double cpu = ThreadCpuMicros() - start;
      std::printf("%.17g %d %.1f\n", t.value, t.exact ? 1 : 0, cpu);
    } else if (what == "logcdf") {
      std::uint64_t n = 0, k = 0;
      std::string at;
      in >> n >> k >> at;
      std::printf("%.17g\n", LogBinomialCdf(n, k, std::strtod(at.c_str(), nullptr)));
    } else if (what == "compression") {
      CompressionEvidence e;
      std::string level;
      int fixed = 0;
      in >> e.sample_count >> e.compression_size >> e.outside_error_count >> level >> fixed;
      e.size_fixed_in_advance = fixed != 0;
      const double delta = std::strtod(level.c_str(), nullptr);
      const double start = ThreadCpuMicros();
      const Certificate c = SampleCompression(e, delta);
      const double cpu = ThreadCpuMicros() - start;
      std::printf("%.17g %d %.1f\n", c.risk_upper_bound, c.exact ? 1 : 0, cpu);
    } else if (what == "plan") {
      HoldoutPlanRequest req;
      in >> req.target_risk >> req.expected_risk >> req.failure_probability;
      double pass = 0.0;
      if (in >> pass) req.pass_probability = pass;
      const double start = ThreadCpuMicros();
      const auto plan = PlanHoldout(req);
      const double cpu = ThreadCpuMicros() - start;
      if (!plan.ok()) {
        std::printf("error\n");
      } else {
        std::printf("%d %llu %llu %.17g %.1f %llu\n", plan->reachable ? 1 : 0,
                    static_cast<unsigned long long>(plan->sample_count),
                    static_cast<unsigned long long>(plan->tolerated_error_count),
                    plan->pass_probability_at_plan, cpu,
                    static_cast<unsigned long long>(plan->bound_evaluation_count));
      }
    } else if (!what.empty()) {
      std::printf("unknown\n");
    }
    std::fflush(stdout);
  }
  return 0;
}
