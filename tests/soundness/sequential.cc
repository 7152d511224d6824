#include "tests/soundness/sequential.h"

#include <algorithm>
#include <cmath>
#include <random>
#include <unordered_map>

#include "boost/math/distributions/binomial.hpp"
#include "service/core/anytime.h"
#include "service/core/numeric.h"

namespace riskbound::soundness {
namespace {

bool UpperPasses(const RerunSetup& s, std::uint64_t n, std::int64_t k) {
  if (k < 0) return true;
  const auto kk = static_cast<std::uint64_t>(k);
  if (kk > n) return false;
  return s.bound == RerunBound::kAnytime ? core::AnytimeUpperAtMost(n, kk, s.share, s.max_risk)
                                         : core::UpperLimitAtMost(n, kk, s.share, s.max_risk);
}

bool LowerFails(const RerunSetup& s, std::uint64_t n, std::int64_t k) {
  if (k < 0) return false;
  const auto kk = static_cast<std::uint64_t>(k);
  if (kk > n) return true;
  return s.bound == RerunBound::kAnytime ? core::AnytimeLowerAbove(n, kk, s.share, s.max_risk)
                                         : core::LowerLimitAbove(n, kk, s.share, s.max_risk);
}

}  // namespace

std::string BoundName(RerunBound b) {
  return b == RerunBound::kAnytime ? "anytime (sequential)" : "Clopper-Pearson (fixed-n)";
}

std::vector<std::int64_t> Thresholds(const RerunSetup& s) {
  std::vector<std::int64_t> out;
  // Both thresholds move by a few counts from one run to the next: walk from
  // the previous one (each step one decision, exactly as the gate decides).
  std::int64_t t = s.wrong == WrongVerdict::kPromote ? -1 : 0;
  for (std::uint64_t r = 1; r <= s.runs; ++r) {
    const std::uint64_t n = r * s.batch;
    const auto last = static_cast<std::int64_t>(n);
    if (s.wrong == WrongVerdict::kPromote) {
      while (t < last && UpperPasses(s, n, t + 1)) ++t;
      while (t >= 0 && !UpperPasses(s, n, t)) --t;
    } else {
      t = std::min(t, last + 1);
      while (t > 0 && LowerFails(s, n, t - 1)) --t;
      while (t <= last && !LowerFails(s, n, t)) ++t;
    }
    out.push_back(t);
  }
  return out;
}

double ExactEverWrong(const RerunSetup& s, const std::vector<std::int64_t>& thresholds) {
  const boost::math::binomial_distribution<double> step(static_cast<double>(s.batch), s.true_error);
  // The batch's pmf, cut where it is below 1e-300 relative (never matters).
  std::vector<double> pmf;
  for (std::uint64_t j = 0; j <= s.batch; ++j) pmf.push_back(boost::math::pdf(step, j));
  std::size_t pmf_hi = pmf.size();
  while (pmf_hi > 1 && pmf[pmf_hi - 1] < 1e-300) --pmf_hi;
  std::size_t pmf_lo = 0;
  while (pmf_lo + 1 < pmf_hi && pmf[pmf_lo] < 1e-300) ++pmf_lo;

  // dist[k]: probability of k errors so far and no wrong verdict yet, over
  // [lo, lo + dist.size()); mass below 1e-18 at the ends is dropped (its sum
  // is added to the answer, so the result never understates).
  std::vector<double> dist = {1.0};
  std::int64_t lo = 0;
  double wrong = 0.0;
  for (std::size_t r = 0; r < thresholds.size(); ++r) {
    std::vector<double> next(dist.size() + pmf_hi - pmf_lo - 1, 0.0);
    for (std::size_t i = 0; i < dist.size(); ++i) {
      if (dist[i] == 0.0) continue;
      for (std::size_t j = pmf_lo; j < pmf_hi; ++j) next[i + j - pmf_lo] += dist[i] * pmf[j];
    }
    lo += static_cast<std::int64_t>(pmf_lo);
    const std::int64_t t = thresholds[r];
    for (std::size_t i = 0; i < next.size(); ++i) {
      const std::int64_t k = lo + static_cast<std::int64_t>(i);
      const bool crosses = s.wrong == WrongVerdict::kPromote ? k <= t : k >= t;
      if (crosses) {
        wrong += next[i];
        next[i] = 0.0;
      }
    }
    std::size_t a = 0;
    while (a < next.size() && next[a] < 1e-18) wrong += next[a++];
    std::size_t b = next.size();
    while (b > a && next[b - 1] < 1e-18) wrong += next[--b];
    dist.assign(next.begin() + static_cast<std::ptrdiff_t>(a),
                next.begin() + static_cast<std::ptrdiff_t>(b));
    lo += static_cast<std::int64_t>(a);
    if (dist.empty()) break;
  }
  return std::min(1.0, wrong);
}

RerunResult RunRerun(const RerunSetup& s, std::int64_t trials, std::uint64_t seed) {
  RerunResult out;
  out.setup = s;
  const std::vector<std::int64_t> thresholds = Thresholds(s);
  out.exact = ExactEverWrong(s, thresholds);
  out.trials = trials;
  if (trials > 0) {
    std::seed_seq seq{seed, s.batch, s.runs, static_cast<std::uint64_t>(s.true_error * 1e9)};
    std::mt19937_64 rng(seq);
    // Each batch's error count by inversion of its binomial CDF (Boost.Math),
    // one uniform per batch. Not std::binomial_distribution: libstdc++'s
    // (GCC 12) is biased at these parameters (mean 12.388 for Bin(250,
    // 0.0495) over 4e6 draws, 7 standard errors above 12.375), enough to
    // move the REJECT rows by several standard errors.
    const boost::math::binomial_distribution<double> law(static_cast<double>(s.batch),
                                                         s.true_error);
    std::vector<double> cdf;
    for (std::uint64_t j = 0; j < s.batch; ++j) {
      cdf.push_back(boost::math::cdf(law, static_cast<double>(j)));
    }
    std::uniform_real_distribution<double> uniform(0.0, 1.0);
    const auto draw = [&](std::mt19937_64& g) {
      return static_cast<std::int64_t>(std::upper_bound(cdf.begin(), cdf.end(), uniform(g)) -
                                       cdf.begin());
    };
    for (std::int64_t i = 0; i < trials; ++i) {
      std::int64_t k = 0;
      for (std::int64_t t : thresholds) {
        k += draw(rng);
        if (s.wrong == WrongVerdict::kPromote ? k <= t : k >= t) {
          ++out.hits;
          break;
        }
      }
    }
    out.simulated = static_cast<double>(out.hits) / static_cast<double>(trials);
    out.standard_error =
        std::sqrt(std::max(out.simulated * (1 - out.simulated), 1.0 / static_cast<double>(trials)) /
                  static_cast<double>(trials));
  }
  return out;
}

PairedRerunResult RunPairedRerun(const PairedRerunSetup& s, std::int64_t trials,
                                 std::uint64_t seed) {
  PairedRerunResult out;
  out.setup = s;
  out.trials = trials;
  const double half = s.share / 2.0;
  // Limits per (run, count), computed on first use.
  std::unordered_map<std::uint64_t, double> upper_b, lower_c;
  const std::uint64_t stride = s.batch * s.runs + 1;
  const auto upper = [&](std::uint64_t r, std::uint64_t n, std::uint64_t b) {
    auto [it, fresh] = upper_b.try_emplace(r * stride + b, 0.0);
    if (fresh) {
      it->second = s.bound == RerunBound::kAnytime ? core::AnytimeUpperLimit(n, b, half).value
                                                   : core::BinomialUpperLimit(n, b, half).value;
    }
    return it->second;
  };
  const auto lower = [&](std::uint64_t r, std::uint64_t n, std::uint64_t c) {
    auto [it, fresh] = lower_c.try_emplace(r * stride + c, 0.0);
    if (fresh) {
      it->second = s.bound == RerunBound::kAnytime ? core::AnytimeLowerLimit(n, c, half).value
                                                   : core::BinomialLowerLimit(n, c, half).value;
    }
    return it->second;
  };
  std::seed_seq seq{seed, s.batch, s.runs, static_cast<std::uint64_t>(s.only_challenger_rate * 1e9),
                    static_cast<std::uint64_t>(s.only_champion_rate * 1e9)};
  std::mt19937_64 rng(seq);
  std::uniform_real_distribution<double> uniform(0.0, 1.0);
  const double pb = s.only_challenger_rate;
  const double pbc = s.only_challenger_rate + s.only_champion_rate;
  for (std::int64_t i = 0; i < trials; ++i) {
    std::uint64_t b = 0, c = 0;
    for (std::uint64_t r = 1; r <= s.runs; ++r) {
      for (std::uint64_t j = 0; j < s.batch; ++j) {
        const double u = uniform(rng);
        if (u < pb) {
          ++b;
        } else if (u < pbc) {
          ++c;
        }
      }
      const std::uint64_t n = r * s.batch;
      if (upper(r, n, b) - lower(r, n, c) <= s.max_regression) {
        ++out.hits;
        break;
      }
    }
  }
  if (trials > 0) {
    out.simulated = static_cast<double>(out.hits) / static_cast<double>(trials);
    out.standard_error =
        std::sqrt(std::max(out.simulated * (1 - out.simulated), 1.0 / static_cast<double>(trials)) /
                  static_cast<double>(trials));
  }
  return out;
}

}  // namespace riskbound::soundness
