#include "service/core/numeric.h"

#include <algorithm>
#include <cmath>
#include <exception>
#include <limits>

#include <boost/math/distributions/binomial.hpp>

#include "absl/status/status.h"

namespace riskbound::core {
namespace {

using boost::math::binomial_distribution;

// x - ln(1 + x) >= 0, given x and ln(1 + x) computed without forming 1 + x.
// For small |x| the series replaces the difference, which would cancel.
double XMinusLog1p(double x, double log1p_x) {
  if (std::fabs(x) < 1e-4) {
    return x * x * (0.5 - x * (1.0 / 3.0 - x * (0.25 - x / 5.0)));
  }
  return x - log1p_x;
}

bool FiniteProbability(double v) { return std::isfinite(v) && v >= 0.0 && v <= 1.0; }

// Stirling's error term lgamma(x) - ((x - 1/2) ln x - x + ln(2 pi)/2), by its
// asymptotic series; accurate to ~1e-16 for x >= 16.
double StirlingError(double x) {
  const double y = 1.0 / (x * x);
  return (1.0 / 12.0 -
          y * (1.0 / 360.0 - y * (1.0 / 1260.0 - y * (1.0 / 1680.0 - y / 1188.0)))) /
         x;
}

// lgamma(y + diff) - lgamma(y) for y >= 16, diff > 0, without cancelling
// large terms: diff (ln y - 1) + (y + diff - 1/2) log1p(diff / y) + err(y +
// diff) - err(y). diff is passed on its own because y + diff may not be
// representable (n + 1 at n = 2^53).
double LogGammaRatio(double y, double diff) {
  const double x = y + diff;
  return diff * (std::log(y) - 1.0) + (y + diff - 0.5) * std::log1p(diff / y) +
         StirlingError(x) - StirlingError(y);
}

// Bisection stops when the bracket is below kBisectionTolerance in absolute
// terms AND relative to the limit's size, so limits near 1e-11 (n ~ 1e15)
// keep twelve significant digits.
bool BracketClosed(double lo, double hi) {
  return hi - lo <= kBisectionTolerance * std::min(1.0, std::max(hi, 1e-300));
}

}  // namespace

double BernoulliKl(double q, double p) {
  constexpr double kInf = std::numeric_limits<double>::infinity();
  if (q <= 0.0) return p >= 1.0 ? kInf : -std::log1p(-p);
  if (q >= 1.0) return p <= 0.0 ? kInf : -std::log(p);
  if (p <= 0.0 || p >= 1.0) return kInf;
  // With d = p - q: kl = q f(d/q) + (1-q) f(-d/(1-q)), f(x) = x - ln(1+x).
  // The linear terms cancel exactly, so kl keeps full relative precision
  // even when p is within 1e-7 of q.
  const double d = p - q;
  const double first = XMinusLog1p(d / q, std::log(p) - std::log(q));
  const double second = XMinusLog1p(-d / (1.0 - q), std::log1p(-p) - std::log1p(-q));
  return q * first + (1.0 - q) * second;
}

double KlInverseUpper(double q, double c) {
  if (c <= 0.0) return q;
  if (q >= 1.0) return 1.0;
  if (q <= 0.0) return -std::expm1(-c);
  // Invariant: kl(q||lo) <= c < kl(q||hi); kl(q||1) is infinite.
  double lo = q;
  double hi = 1.0;
  while (!BracketClosed(lo, hi)) {
    const double mid = lo + (hi - lo) / 2.0;
    if (mid <= lo || mid >= hi) break;
    if (BernoulliKl(q, mid) <= c) {
      lo = mid;
    } else {
      hi = mid;
    }
  }
  return hi;
}

double KlInverseLower(double q, double c) {
  if (c <= 0.0) return q;
  if (q <= 0.0) return 0.0;
  if (q >= 1.0) return std::exp(-c);  // kl(1||p) = -ln p.
  // Invariant: kl(q||lo) > c >= kl(q||hi), or lo = 0.
  double lo = 0.0;
  double hi = q;
  while (!BracketClosed(lo, hi)) {
    const double mid = lo + (hi - lo) / 2.0;
    if (mid <= lo || mid >= hi) break;
    if (BernoulliKl(q, mid) <= c) {
      hi = mid;
    } else {
      lo = mid;
    }
  }
  return lo;
}

TailLimit BinomialUpperLimit(std::uint64_t n, std::uint64_t k, double delta) {
  if (k >= n) return {1.0, true};
  const double nd = static_cast<double>(n);
  if (k == 0) return {-std::expm1(std::log(delta) / nd), true};
  try {
    const double v = binomial_distribution<>::find_upper_bound_on_p(
        nd, static_cast<double>(k), delta);
    if (FiniteProbability(v)) return {v, true};
  } catch (const std::exception&) {
    // Fall through to the conservative relaxation.
  }
  const double q = static_cast<double>(k) / nd;
  return {KlInverseUpper(q, -std::log(delta) / nd), false};
}

TailLimit BinomialLowerLimit(std::uint64_t n, std::uint64_t k, double delta) {
  if (k == 0) return {0.0, true};
  const double nd = static_cast<double>(n);
  if (k >= n) return {std::exp(std::log(delta) / nd), true};
  try {
    const double v = binomial_distribution<>::find_lower_bound_on_p(
        nd, static_cast<double>(k), delta);
    if (FiniteProbability(v)) return {v, true};
  } catch (const std::exception&) {
    // Fall through to the conservative relaxation.
  }
  const double q = static_cast<double>(k) / nd;
  return {KlInverseLower(q, -std::log(delta) / nd), false};
}

double LogChoose(double n, double k) {
  if (k <= 0.0 || k >= n) return 0.0;
  const double small = std::min(k, n - k);
  // Below 16 there is nothing large to cancel; above, lgamma(n+1) ~ 3.4e16 at
  // n = 1e15 has an ulp of 4, so the difference is rewritten instead.
  if (n - small + 1.0 < 16.0) {
    return std::lgamma(n + 1.0) - std::lgamma(small + 1.0) - std::lgamma(n - small + 1.0);
  }
  return LogGammaRatio(n - small + 1.0, small) - std::lgamma(small + 1.0);
}

double LogBinomialCdf(std::uint64_t n, std::uint64_t k, double p) {
  if (k >= n || p <= 0.0) return 0.0;
  const double nd = static_cast<double>(n);
  if (p >= 1.0) return -std::numeric_limits<double>::infinity();
  const double lp = std::log(p);
  const double lq = std::log1p(-p);
  // Terms j = 0..k; find the largest first for a stable log-sum-exp.
  double max_term = -std::numeric_limits<double>::infinity();
  for (std::uint64_t j = 0; j <= k; ++j) {
    const double jd = static_cast<double>(j);
    max_term = std::max(max_term, LogChoose(nd, jd) + jd * lp + (nd - jd) * lq);
  }
  double sum = 0.0;
  for (std::uint64_t j = 0; j <= k; ++j) {
    const double jd = static_cast<double>(j);
    sum += std::exp(LogChoose(nd, jd) + jd * lp + (nd - jd) * lq - max_term);
  }
  return max_term + std::log(sum);
}

TailLimit BinomialUpperLimitLogDelta(std::uint64_t n, std::uint64_t k,
                                     double log_delta) {
  if (k >= n) return {1.0, true};
  const double nd = static_cast<double>(n);
  if (k == 0) return {-std::expm1(log_delta / nd), true};
  // exp() of anything above ln(DBL_MIN) ~ -708.4 is a normal double.
  if (log_delta > -700.0) return BinomialUpperLimit(n, k, std::exp(log_delta));
  const double q = static_cast<double>(k) / nd;
  const double relaxed = KlInverseUpper(q, -log_delta / nd);
  if (k > 10'000'000) return {relaxed, false};
  // ln P(Bin(n,p) <= k) decreases in p. Invariant: cdf(lo) >= log_delta > cdf(hi).
  double lo = q;
  double hi = relaxed;
  if (LogBinomialCdf(n, k, hi) >= log_delta) return {relaxed, false};
  while (hi - lo > kBisectionTolerance * std::max(hi, 1e-300)) {
    const double mid = lo + (hi - lo) / 2.0;
    if (mid <= lo || mid >= hi) break;
    if (LogBinomialCdf(n, k, mid) >= log_delta) {
      lo = mid;
    } else {
      hi = mid;
    }
  }
  return {hi, true};
}

absl::StatusOr<std::uint64_t> SmallestSatisfying(
    std::uint64_t lo, std::uint64_t hi,
    const std::function<bool(std::uint64_t)>& ok) {
  if (!ok(hi)) {
    return absl::NotFoundError("no value in the search range satisfies the target");
  }
  if (ok(lo)) return lo;
  // Exponential search for a bracket (bad, good].
  std::uint64_t bad = lo;
  std::uint64_t step = 1;
  std::uint64_t good = hi;
  while (true) {
    const std::uint64_t probe = (hi - bad > step) ? bad + step : hi;
    if (ok(probe)) {
      good = probe;
      break;
    }
    bad = probe;
    if (probe == hi) break;  // Unreachable: ok(hi) is true.
    step = step > (std::numeric_limits<std::uint64_t>::max() / 2) ? step : step * 2;
  }
  while (good - bad > 1) {
    const std::uint64_t mid = bad + (good - bad) / 2;
    if (ok(mid)) {
      good = mid;
    } else {
      bad = mid;
    }
  }
  return good;
}

}  // namespace riskbound::core
