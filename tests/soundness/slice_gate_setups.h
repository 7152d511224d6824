// The slice-gate setups shared by the fast test (slice_gate_test.cc) and the
// report (soundness_report.cc): G = 4 slices of 200, 500, 1000 and 3000
// hold-out samples with limits 0.08, 0.05, 0.05 and 0.02, policy
// failure_probability 0.05 and no champion (the slices' part is 0.025), at
// true rates at, above and below the limits.
#ifndef RISKBOUND_TESTS_SOUNDNESS_SLICE_GATE_SETUPS_H_
#define RISKBOUND_TESTS_SOUNDNESS_SLICE_GATE_SETUPS_H_

#include <string>
#include <utility>
#include <vector>

#include "tests/soundness/slice_gate.h"

namespace riskbound::soundness {

// (label, setup) for one share rule.
inline std::vector<std::pair<std::string, SliceGateSetup>> SliceGateSetups(
    core::SliceShareRule rule) {
  const std::vector<std::uint64_t> sizes = {200, 500, 1000, 3000};
  const std::vector<double> limits = {0.08, 0.05, 0.05, 0.02};
  const auto setup = [&](std::vector<double> rates) {
    SliceGateSetup s;
    s.sizes = sizes;
    s.limits = limits;
    s.true_rates = std::move(rates);
    s.rule = rule;
    return s;
  };
  return {
      {"every slice at its limit", setup({0.08, 0.05, 0.05, 0.02})},
      {"every slice at 0.9 x its limit", setup({0.072, 0.045, 0.045, 0.018})},
      {"slice of 200 at its limit, others at 0.2 x", setup({0.08, 0.01, 0.01, 0.004})},
      {"slice of 3000 at its limit, others at 0.2 x", setup({0.016, 0.01, 0.01, 0.02})},
      {"slice of 1000 at 1.2 x its limit, others at 0.2 x", setup({0.016, 0.01, 0.06, 0.004})},
      {"slices of 200 and 3000 at 1.1 x, others at their limit", setup({0.088, 0.05, 0.05, 0.022})},
  };
}

}  // namespace riskbound::soundness

#endif  // RISKBOUND_TESTS_SOUNDNESS_SLICE_GATE_SETUPS_H_
