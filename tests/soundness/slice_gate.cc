#include "tests/soundness/slice_gate.h"

#include <algorithm>
#include <cmath>
#include <random>

#include "absl/strings/str_format.h"
#include "boost/math/distributions/binomial.hpp"
#include "service/core/anytime.h"
#include "service/core/delta_split.h"
#include "service/core/holdout.h"
#include "tests/soundness/sequential.h"

namespace riskbound::soundness {
namespace {

// The gate's per-slice certificate (gate.cc, MeasureSlices).
core::Certificate SliceBounds(std::uint64_t n, std::uint64_t k, double half, bool sequential) {
  core::SampleCounts c{k, n};
  return sequential ? core::HoldoutAnytime(c, half) : core::HoldoutExactBinomial(c, half);
}

// The largest k in [0, n] with upper(k) <= limit (-1: none); the upper limit
// grows with k, so by bisection.
std::int64_t KMaxClears(std::uint64_t n, double half, double limit) {
  const auto clears = [&](std::uint64_t k) {
    return SliceBounds(n, k, half, false).risk_upper_bound <= limit;
  };
  if (!clears(0)) return -1;
  std::uint64_t lo = 0, hi = n;  // clears(lo)
  if (clears(hi)) return static_cast<std::int64_t>(hi);
  while (hi - lo > 1) {
    const std::uint64_t mid = lo + (hi - lo) / 2;
    (clears(mid) ? lo : hi) = mid;
  }
  return static_cast<std::int64_t>(lo);
}

// The smallest k in [0, n] with lower(k) > limit (n + 1: none).
std::int64_t KMinExceeds(std::uint64_t n, double half, double limit) {
  const auto exceeds = [&](std::uint64_t k) {
    return SliceBounds(n, k, half, false).risk_lower_bound.value_or(0.0) > limit;
  };
  if (!exceeds(n)) return static_cast<std::int64_t>(n) + 1;
  if (exceeds(0)) return 0;
  std::uint64_t lo = 0, hi = n;  // !exceeds(lo), exceeds(hi)
  while (hi - lo > 1) {
    const std::uint64_t mid = lo + (hi - lo) / 2;
    (exceeds(mid) ? hi : lo) = mid;
  }
  return static_cast<std::int64_t>(hi);
}

// What a set of one-sided statements at `halves` may fail with together.
double Promise(core::SliceShareRule rule, const std::vector<double>& halves) {
  double sum = 0.0, keep = 1.0;
  for (double h : halves) {
    sum += h;
    keep *= 1.0 - h;
  }
  return rule == core::SliceShareRule::kSidak ? 1.0 - keep : sum;
}

double BinomialCdf(std::uint64_t n, double p, std::int64_t k) {
  if (k < 0) return 0.0;
  if (k >= static_cast<std::int64_t>(n)) return 1.0;
  return boost::math::cdf(boost::math::binomial_distribution<double>(static_cast<double>(n), p),
                          static_cast<double>(k));
}

}  // namespace

std::vector<core::SliceEvidence> SetupSlices(const SliceGateSetup& s) {
  std::vector<core::SliceEvidence> out;
  for (std::size_t i = 0; i < s.sizes.size(); ++i) {
    core::SliceEvidence e;
    e.name = absl::StrFormat("slice-%d", i);
    e.sample_count = s.sizes[i];
    out.push_back(e);
  }
  return out;
}

SliceGateResult RunSliceGate(const SliceGateSetup& s, std::int64_t trials, std::uint64_t seed) {
  SliceGateResult r;
  r.setup = s;
  const std::size_t g = s.sizes.size();
  core::SliceSharing sharing;
  sharing.rule = s.rule;
  // gate.cc MakeSplit: equal parts risk and slices, rounded down.
  r.slices_part = core::EqualShare(s.failure_probability, 2);
  r.shares = core::SliceShares(sharing, SetupSlices(s), r.slices_part);
  std::vector<double> bad_halves, all_halves;
  r.exact_promote = 1.0;
  double no_exceed = 1.0;
  for (std::size_t j = 0; j < g; ++j) {
    const double half = r.shares[j] / 2.0;
    r.k_max_clears.push_back(KMaxClears(s.sizes[j], half, s.limits[j]));
    r.k_min_exceeds.push_back(KMinExceeds(s.sizes[j], half, s.limits[j]));
    all_halves.push_back(half);
    if (s.true_rates[j] >= s.limits[j]) bad_halves.push_back(half);
    r.exact_promote *= BinomialCdf(s.sizes[j], s.true_rates[j], r.k_max_clears[j]);
    no_exceed *= BinomialCdf(s.sizes[j], s.true_rates[j], r.k_min_exceeds[j] - 1);
  }
  r.exact_reject = 1.0 - no_exceed;
  r.promote_is_wrong = !bad_halves.empty();
  r.reject_is_wrong = true;
  for (std::size_t j = 0; j < g; ++j) {
    r.reject_is_wrong = r.reject_is_wrong && s.true_rates[j] <= s.limits[j];
  }
  r.promote_promise = Promise(s.rule, bad_halves);
  r.reject_promise = Promise(s.rule, all_halves);

  r.trials = trials;
  if (trials <= 0) return r;
  // Each slice's count by inversion of its Boost.Math binomial CDF (not
  // std::binomial_distribution, biased at some parameters: sequential.cc).
  std::vector<std::vector<double>> cdfs(g);
  for (std::size_t j = 0; j < g; ++j) {
    const boost::math::binomial_distribution<double> law(static_cast<double>(s.sizes[j]),
                                                         s.true_rates[j]);
    for (std::uint64_t k = 0; k < s.sizes[j]; ++k) {
      cdfs[j].push_back(boost::math::cdf(law, static_cast<double>(k)));
    }
  }
  std::seed_seq seq{seed, static_cast<std::uint64_t>(g), static_cast<std::uint64_t>(s.rule),
                    static_cast<std::uint64_t>(s.true_rates[0] * 1e9),
                    static_cast<std::uint64_t>(s.true_rates[g - 1] * 1e9)};
  std::mt19937_64 rng(seq);
  std::uniform_real_distribution<double> uniform(0.0, 1.0);
  for (std::int64_t t = 0; t < trials; ++t) {
    bool all_clear = true, some_exceeds = false;
    for (std::size_t j = 0; j < g; ++j) {
      const auto k = static_cast<std::int64_t>(
          std::upper_bound(cdfs[j].begin(), cdfs[j].end(), uniform(rng)) - cdfs[j].begin());
      all_clear = all_clear && k <= r.k_max_clears[j];
      some_exceeds = some_exceeds || k >= r.k_min_exceeds[j];
    }
    if (all_clear) ++r.promote_hits;
    if (some_exceeds) ++r.reject_hits;
  }
  r.simulated_promote = static_cast<double>(r.promote_hits) / static_cast<double>(trials);
  r.simulated_reject = static_cast<double>(r.reject_hits) / static_cast<double>(trials);
  return r;
}

std::vector<std::string> CheckSliceGate(const SliceGateResult& r) {
  std::vector<std::string> out;
  const auto check = [&](const char* what, double exact, double simulated, double promise) {
    if (!(exact <= promise)) {
      out.push_back(
          absl::StrFormat("exact P(wrong %s) %.6f above its promise %.6f", what, exact, promise));
    }
    if (r.trials > 0) {
      const double t = static_cast<double>(r.trials);
      const double tol = 3.0 * std::sqrt(promise * (1.0 - promise) / t) + 1.0 / t;
      if (!(simulated <= promise + tol)) {
        out.push_back(absl::StrFormat("simulated P(wrong %s) %.6f above its promise %.6f + %.6f",
                                      what, simulated, promise, tol));
      }
      // The simulation agrees with the exact value (4 standard errors).
      const double agree = 4.0 * std::sqrt(exact * (1.0 - exact) / t) + 1.0 / t;
      if (!(std::abs(simulated - exact) <= agree)) {
        out.push_back(
            absl::StrFormat("simulated P(%s) %.6f differs from the exact %.6f by more "
                            "than %.6f",
                            what, simulated, exact, agree));
      }
    }
  };
  if (r.promote_is_wrong) check("PROMOTE", r.exact_promote, r.simulated_promote, r.promote_promise);
  if (r.reject_is_wrong) check("REJECT", r.exact_reject, r.simulated_reject, r.reject_promise);
  const double part = r.slices_part;
  if (r.promote_promise > part || r.reject_promise > part) {
    out.push_back(absl::StrFormat("a promise above the slices' part %.6f", part));
  }
  return out;
}

SequentialSliceResult RunSequentialSlices(const SliceGateSetup& s, std::uint64_t runs) {
  SequentialSliceResult out;
  core::SliceSharing sharing;
  sharing.rule = s.rule;
  const double part = core::EqualShare(s.failure_probability, 2);
  const std::vector<double> shares = core::SliceShares(sharing, SetupSlices(s), part);
  std::vector<double> bad_halves, all_halves;
  for (const RerunBound bound : {RerunBound::kAnytime, RerunBound::kFixedClopperPearson}) {
    double keep_reject = 1.0, keep_promote = 1.0;
    for (std::size_t j = 0; j < s.sizes.size(); ++j) {
      RerunSetup r;
      r.max_risk = s.limits[j];
      r.share = shares[j] / 2.0;
      r.batch = std::max<std::uint64_t>(1, s.sizes[j] / runs);
      r.runs = runs;
      r.bound = bound;
      // Every slice at its limit: a REJECT at some run is wrong.
      r.true_error = s.limits[j];
      r.wrong = WrongVerdict::kReject;
      keep_reject *= 1.0 - ExactEverWrong(r, Thresholds(r));
      if (bound == RerunBound::kAnytime) all_halves.push_back(r.share);
      if (s.true_rates[j] >= s.limits[j]) {
        r.true_error = s.true_rates[j];
        r.wrong = WrongVerdict::kPromote;
        keep_promote *= 1.0 - ExactEverWrong(r, Thresholds(r));
        if (bound == RerunBound::kAnytime) bad_halves.push_back(r.share);
      }
    }
    if (bound == RerunBound::kAnytime) {
      out.reject_ever = 1.0 - keep_reject;
      out.promote_ever_bound = 1.0 - keep_promote;
    } else {
      out.fixed_reject_ever = 1.0 - keep_reject;
      out.fixed_promote_ever_bound = 1.0 - keep_promote;
    }
  }
  out.reject_promise = Promise(s.rule, all_halves);
  out.promote_promise = Promise(s.rule, bad_halves);
  return out;
}

}  // namespace riskbound::soundness
