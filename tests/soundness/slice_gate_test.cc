// Fast variant (ctest) of the slice-gate soundness check of issue 16
// (tests/soundness/slice_gate.h; the long run is a section of REPORT.md,
// written by riskbound_soundness).
#include <cmath>
#include <iostream>

#include "absl/strings/str_format.h"
#include "absl/strings/str_join.h"
#include "gtest/gtest.h"
#include "service/core/gate.h"
#include "tests/soundness/slice_gate.h"
#include "tests/soundness/slice_gate_setups.h"

namespace riskbound::soundness {
namespace {

constexpr std::int64_t kFastTrials = 4000;
constexpr std::uint64_t kSeed = 20240611;

// The thresholds the simulation uses are the gate's own decisions: at
// k_max_clears a slice CLEARS and one more error does not; at k_min_exceeds
// it EXCEEDS and one fewer does not. Source: core::DecideGate itself.
void ExpectThresholdsAreTheGates(const SliceGateResult& r) {
  const SliceGateSetup& s = r.setup;
  const auto outcome = [&](std::size_t which, std::int64_t errors) {
    core::GatePolicy p;
    p.max_risk = 0.5;  // the overall risk never decides here
    p.failure_probability = s.failure_probability;
    p.slice_sharing.rule = s.rule;
    core::GateCandidate c;
    c.id = "fern-9";
    c.evidence.slices = SetupSlices(s);
    std::uint64_t n = 0;
    for (std::size_t j = 0; j < s.sizes.size(); ++j) {
      p.slice_max_risks.push_back({c.evidence.slices[j].name, s.limits[j]});
      c.evidence.slices[j].error_count = j == which ? static_cast<std::uint64_t>(errors) : 0;
      n += s.sizes[j];
    }
    c.evidence.holdout = core::SampleCounts{static_cast<std::uint64_t>(errors), n};
    absl::StatusOr<core::GateDecision> d = core::DecideGate(p, c, std::nullopt);
    EXPECT_TRUE(d.ok()) << d.status();
    for (const core::SliceCheck& sc : d->slices) {
      if (sc.slice_name == c.evidence.slices[which].name) return sc.outcome;
    }
    ADD_FAILURE() << "slice missing";
    return core::SliceOutcome::kUndecided;
  };
  for (std::size_t j = 0; j < s.sizes.size(); ++j) {
    SCOPED_TRACE(absl::StrFormat("slice %d of %d samples", j, s.sizes[j]));
    const std::int64_t k_max = r.k_max_clears[j], k_min = r.k_min_exceeds[j];
    ASSERT_GE(k_max, 0);
    ASSERT_LE(k_min, static_cast<std::int64_t>(s.sizes[j]));
    EXPECT_EQ(outcome(j, k_max), core::SliceOutcome::kClears);
    EXPECT_NE(outcome(j, k_max + 1), core::SliceOutcome::kClears);
    EXPECT_NE(outcome(j, k_min - 1), core::SliceOutcome::kExceeds);
    EXPECT_EQ(outcome(j, k_min), core::SliceOutcome::kExceeds);
  }
}

// Source: Bonferroni (1936) and Sidak (1967) for the promises; Clopper &
// Pearson (1934) for each slice's limits; brute force (exact product of
// Boost.Math binomial CDFs over the independent slices) and Monte-Carlo for
// the probabilities. Asserted: the exact P(wrong verdict) <= its promise
// <= the slices' part 0.025; the simulated one <= the promise + 3 binomial
// standard errors + 1/T, and within 4 standard errors of the exact one.
TEST(SliceGateSoundnessTest, WrongVerdictsStayWithinTheSlicesShares) {
  for (const core::SliceShareRule rule :
       {core::SliceShareRule::kBonferroni, core::SliceShareRule::kSidak}) {
    bool first = true;
    for (const auto& [label, setup] : SliceGateSetups(rule)) {
      SCOPED_TRACE(absl::StrCat(core::SliceShareRuleName(rule), ": ", label));
      const SliceGateResult r = RunSliceGate(setup, kFastTrials, kSeed);
      std::cout << absl::StrFormat(
          "%s, %s: P(PROMOTE) exact %.5f simulated %.5f (promise %.5f, wrong: %d); P(REJECT) "
          "exact %.5f simulated %.5f (promise %.5f, wrong: %d)\n",
          core::SliceShareRuleName(rule), label, r.exact_promote, r.simulated_promote,
          r.promote_promise, r.promote_is_wrong, r.exact_reject, r.simulated_reject,
          r.reject_promise, r.reject_is_wrong);
      const std::vector<std::string> failures = CheckSliceGate(r);
      EXPECT_TRUE(failures.empty()) << absl::StrJoin(failures, "\n");
      EXPECT_LE(r.promote_promise, 0.025);
      EXPECT_LE(r.reject_promise, 0.025);
      if (first) ExpectThresholdsAreTheGates(r);
      first = false;
    }
  }
}

// Every slice at its limit is the worst case for a wrong REJECT: the exact
// probability then comes close to its promise (Clopper-Pearson is
// conservative, so not to it), which shows the check can fail.
// Source: brute force (Boost.Math binomial CDFs).
TEST(SliceGateSoundnessTest, AtTheLimitsTheRejectPromiseIsNearlyUsed) {
  const auto setups = SliceGateSetups(core::SliceShareRule::kBonferroni);
  const SliceGateResult r = RunSliceGate(setups[0].second, 0, kSeed);
  EXPECT_GT(r.exact_reject, 0.75 * r.reject_promise);
  EXPECT_LE(r.exact_reject, r.reject_promise);
}

// Sequential mode: re-running the gate as every slice grows, 20 times. With
// the anytime-valid slice bounds (Ville 1939) the chance of a wrong REJECT
// at some run, and of a slice above its limit clearing at some run, stay
// within the promises; with fixed-size bounds the REJECT one grows past
// its single-look value. Source: brute force (sequential.h ExactEverWrong
// per slice, the slices independent).
TEST(SliceGateSoundnessTest, SequentialSliceBoundsKeepThePromiseOverReruns) {
  for (const core::SliceShareRule rule :
       {core::SliceShareRule::kBonferroni, core::SliceShareRule::kSidak}) {
    SliceGateSetup s = SliceGateSetups(rule)[0].second;
    s.true_rates = {0.084, 0.0525, 0.0525, 0.021};  // 1.05 x the limits
    const SequentialSliceResult r = RunSequentialSlices(s, 20);
    std::cout << absl::StrFormat(
        "%s sequential x20: REJECT ever %.5f (fixed-n %.5f), promise %.5f; a slice above its "
        "limit clears ever %.5f (fixed-n %.5f), promise %.5f\n",
        core::SliceShareRuleName(rule), r.reject_ever, r.fixed_reject_ever, r.reject_promise,
        r.promote_ever_bound, r.fixed_promote_ever_bound, r.promote_promise);
    EXPECT_LE(r.reject_ever, r.reject_promise);
    EXPECT_LE(r.promote_ever_bound, r.promote_promise);
    EXPECT_LE(r.reject_promise, 0.025);
    const SliceGateResult once = RunSliceGate(SliceGateSetups(rule)[0].second, 0, kSeed);
    EXPECT_GT(r.fixed_reject_ever, once.exact_reject);
  }
}

}  // namespace
}  // namespace riskbound::soundness
