#include "service/core/numeric.h"

#include <algorithm>
#include <cmath>
#include <exception>
#include <limits>
#include <numbers>

#include <boost/math/distributions/binomial.hpp>
#include <boost/math/policies/policy.hpp>

#include "absl/status/status.h"

namespace riskbound::core {
namespace {

// Boost.Math with its work capped: a root search gives up after
// kBoostRootIterations steps and a series or continued fraction after
// kBoostSeriesIterations terms (evaluation_error, caught below), instead of
// the defaults (200 and 10^6) that cost tens of milliseconds per call at
// counts near 2^53. Where Boost gives up, the bracketed log-space searches
// below take over.
constexpr int kBoostRootIterations = 40;
constexpr int kBoostSeriesIterations = 10000;
using CappedPolicy = boost::math::policies::policy<
    boost::math::policies::max_root_iterations<kBoostRootIterations>,
    boost::math::policies::max_series_iterations<kBoostSeriesIterations>>;
using Binomial = boost::math::binomial_distribution<double, CappedPolicy>;
// Above this many samples Boost's inversion is not tried at all: it rarely
// converges there within the caps and only costs time.
constexpr double kBoostInverseMaxSamples = 4294967296.0;  // 2^32

// Terms a tail sum adds one by one before it either converged or reports
// bounds: the cheap first try, and the most it ever adds.
constexpr std::uint64_t kTailTermsFirst = 1024;
constexpr std::uint64_t kTailTermsMax = 16384;

// A tail sum has converged when the bound on what is left is below this
// fraction of the partial sum (below half an ulp of a double).
constexpr double kTailNegligible = 0x1p-56;

// Below this, exp() of a log probability is not a normal double.
constexpr double kLogNormalMin = -700.0;

// x - ln(1 + x) >= 0 for |x| <= 1/2, to a few ulps: with t = x / (2 + x),
// ln(1 + x) = 2 atanh(t) = 2 (t + t^3/3 + t^5/5 + ...) and x - 2t = x t, so
// x - ln(1 + x) = x t - 2 t^3 (1/3 + t^2/5 + ...), |t| <= 1/3: no term
// cancels (the plain difference loses up to half the digits near x = 1e-4).
double XMinusLog1pSmall(double x) {
  // 1 / (2i + 3), i = 0..19.
  static constexpr double kOdd[20] = {
      1.0 / 3,  1.0 / 5,  1.0 / 7,  1.0 / 9,  1.0 / 11, 1.0 / 13, 1.0 / 15,
      1.0 / 17, 1.0 / 19, 1.0 / 21, 1.0 / 23, 1.0 / 25, 1.0 / 27, 1.0 / 29,
      1.0 / 31, 1.0 / 33, 1.0 / 35, 1.0 / 37, 1.0 / 39, 1.0 / 41};
  const double t = x / (2.0 + x);
  const double t2 = t * t;
  // Terms up to t2^(terms-1): the first left out is below 2^-56 of the sum.
  const int terms = t2 < 1e-9 ? 2 : t2 < 1e-4 ? 5 : t2 < 1e-2 ? 9 : 20;
  double s = 0.0;
  for (int i = terms - 1; i >= 0; --i) s = s * t2 + kOdd[i];
  return x * t - 2.0 * t * t2 * s;
}

// w f(d / w) with f(x) = x - ln(1 + x), w > 0, for the terms of kl(q || q +
// d) (w = q) and its mirror (w = 1 - q, d negated): the series above for
// |d / w| <= 1/2, else d - w ln(1 + d / w) with the logarithm `log_ratio` of
// (w + d) / w supplied by the caller from the unrounded values.
template <typename LogRatio>
double WeightedXMinusLog1p(double w, double d, LogRatio log_ratio) {
  const double x = d / w;
  if (std::fabs(x) <= 0.5) return w * XMinusLog1pSmall(x);
  return d - w * log_ratio();
}

// ln(a / b) for 0 < a, b: the quotient's logarithm when it is a normal
// double (one rounding), else the difference of logarithms.
double LogRatio(double a, double b) {
  const double r = a / b;
  if (std::isfinite(r) && r >= std::numeric_limits<double>::min()) return std::log(r);
  return std::log(a) - std::log(b);
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
// terms AND relative to the limit's size AND relative to its distance from 1,
// so limits near 1e-11 (n ~ 1e15) keep twelve significant digits, and so do
// 1 - limit for limits near 1 (k = n - 1 at n ~ 1e12 puts the upper limit
// 7e-13 below 1).
bool BracketClosed(double lo, double hi) {
  return hi - lo <=
         kBisectionTolerance * std::min({1.0, std::max(hi, 1e-300), std::max(1.0 - lo, 1e-300)});
}

// The midpoint of a bisection step: geometric while the bracket spans more
// than a factor 4 (so a bracket from 1e-300 to 1 closes in about 50 steps,
// not 1000), arithmetic after.
double Mid(double lo, double hi) {
  if (lo > 0.0 && hi > 4.0 * lo) return std::sqrt(lo) * std::sqrt(hi);
  return lo + (hi - lo) / 2.0;
}

// D(x) = ln x! - (x ln x - x + ln(2 pi x)/2), Stirling's remainder for x!.
double StirlingRemainder(double x) {
  if (x >= 16.0) return StirlingError(x);
  return std::lgamma(x + 1.0) - (x * std::log(x) - x + 0.5 * std::log(2.0 * std::numbers::pi * x));
}

// ln C(n, k) - n H(k/n) for 0 <= k <= n, H the entropy in nats: small
// (about -ln(2 pi k (n-k)/n)/2) and free of the cancellation of the two large
// terms, from Stirling's formula with its exact remainders.
double LogChooseMinusEntropy(double n, double k) {
  if (k <= 0.0 || k >= n) return 0.0;
  const double nk = n - k;
  return 0.5 * std::log(n / (2.0 * std::numbers::pi * k * nk)) + StirlingRemainder(n) -
         StirlingRemainder(k) - StirlingRemainder(nk);
}

// kl(q || q + d) for q + d in [0, 1], from the offset d itself, so that
// nothing is lost to rounding q + d: q f(d/q) + (1-q) f(-d/(1-q)) with
// f(x) = x - ln(1 + x) (kl(0 || d) = -ln(1 - d), kl(1 || 1 + d) = -ln(1 + d)).
// With `log_odds_ratio`, also ln((q + d)/q) - ln((1 - q - d)/(1 - q)) = x -
// f(x) - (y - f(y)) (x = d/q, y = -d/(1-q)), from the same f values; only
// asked for 0 < q < 1.
double KlAtOffset(double q, double d, double* log_odds_ratio = nullptr) {
  if (q <= 0.0) return -std::log1p(-d);
  if (q >= 1.0) return -std::log1p(d);
  const double w = 1.0 - q;
  const double x = d / q;
  const double y = -d / w;
  const double fx = std::fabs(x) <= 0.5 ? XMinusLog1pSmall(x) : x - std::log1p(x);
  const double fy = std::fabs(y) <= 0.5 ? XMinusLog1pSmall(y) : y - std::log1p(y);
  if (log_odds_ratio != nullptr) *log_odds_ratio = (x - fx) - (y - fy);
  return q * fx + w * fy;
}

// k/n as a double and what its rounding left out: r = k - n q exactly (one
// fma), |r| <= n ulp(q) / 2.
struct RoundedRate {
  double q;
  double r;
};
RoundedRate Rate(double n, double k) {
  const double q = k / n;
  return {q, std::fma(-n, q, k)};
}

// ln P(Bin(n, p) = k) = ln C(n, k) + k ln p + (n - k) ln(1 - p), written with
// q = k/n rounded to a double and r = k - n q as
//   [ln C(n, k) - n H(k/n)] + r ln((1 - q)/q) - n kl(q || p) + r ln(p/(1 - p))
// (the first bracket from Stirling's formula with exact remainders, the r ln
// terms exact up to r^2 / (2 n q (1 - q)), below 1e-17 here): every part keeps
// full relative precision, so the result is good to about 1e-15 of its size
// even at n = 2^53 (summing ln C(n, k), k ln p and (n - k) ln(1 - p) would
// lose everything to cancellation there, and dropping r costs up to
// k 1e-16 ln(p/q)). Above k = 3n/4 with p >= 1/2 the mirror image (n, n - k,
// 1 - p) is used, where 1 - q keeps its relative precision and 1 - p is
// exact (Sterbenz); with p < 1/2 there the term is below e^(-n/8) and only
// small n matter, where q = k/n is as good.
double LogPmf(double n, double k, double p) {
  if (p <= 0.0) return k <= 0.0 ? 0.0 : -std::numeric_limits<double>::infinity();
  if (p >= 1.0) return k >= n ? 0.0 : -std::numeric_limits<double>::infinity();
  if (k > 0.75 * n && p >= 0.5) return LogPmf(n, n - k, 1.0 - p);
  const RoundedRate rate = Rate(n, k);
  double v = LogChooseMinusEntropy(n, k) - n * BernoulliKl(rate.q, p);
  if (rate.r != 0.0) {
    v += rate.r * (std::log(p) - std::log(rate.q) + std::log1p(-rate.q) - std::log1p(-p));
  }
  return v;
}

// Bounds on ln of a binomial tail.
struct LogBounds {
  double lower;
  double upper;
  bool Converged() const { return lower == upper; }
};

// Sum of a binomial tail from its first term t_k away from the mode:
// S = sum_{i=0..m} t_{k -/+ i} / t_k, where the ratio of consecutive terms is
// r_i = (m - i + 1) / (n - m + i) * odds (lower tail: m = k, odds = (1-p)/p;
// upper tail: m = n - k, odds = p/(1-p)). REQUIRES r_1 < 1: the ratios then
// fall with i, so after any term the rest is at most term * r / (1 - r)
// (a geometric series at the current ratio) and at most term * (terms left).
// Adds terms until that rest is negligible (lower = upper: the sum to double
// precision), the partial sum reaches `enough` (a caller's threshold, so the
// answer is already decided), or `max_terms` were added (lower = partial
// sum, upper = partial sum + the bound on the rest). Returns ln of the bounds.
LogBounds LogTailRatioSum(double n, double m, double odds, double enough,
                          std::uint64_t max_terms) {
  double sum = 1.0;
  double term = 1.0;
  double i = 0.0;
  for (std::uint64_t step = 0;; ++step) {
    if (i >= m) return {std::log(sum), std::log(sum)};
    const double r = (m - i) / (n - m + i + 1.0) * odds;
    const double rest = r < 1.0 ? term * std::min(r / (1.0 - r), m - i) : term * (m - i);
    if (rest <= kTailNegligible * sum) return {std::log(sum), std::log(sum)};
    if (sum >= enough || step >= max_terms) {
      return {std::log(sum), std::log(sum + rest)};
    }
    term *= r;
    sum += term;
    i += 1.0;
  }
}

// Gauss-Legendre nodes and weights of order 20 on [-1, 1], the positive half
// (the rule is symmetric); from numpy.polynomial.legendre.leggauss(20).
constexpr double kGaussLegendre20[10][2] = {
    {0.07652652113349734, 0.15275338713072578}, {0.2277858511416451, 0.14917298647260366},
    {0.37370608871541955, 0.14209610931838187}, {0.5108670019508271, 0.13168863844917653},
    {0.636053680726515, 0.11819453196151825},   {0.7463319064601508, 0.10193011981724026},
    {0.8391169718222188, 0.08327674157670467},  {0.9122344282513258, 0.06267204833410944},
    {0.9639719272779138, 0.04060142980038622},  {0.9931285991850949, 0.017614007139153273},
};

// A segment stops the integral once the integrand has fallen this far (in
// nats) below its largest value on the range: the rest of a log-concave
// integrand is then below e^-42 (4e-19) of the sum, below half an ulp.
constexpr double kQuadratureDrop = 42.0;
constexpr int kQuadratureSegments = 400;

// ln of the integral of u^j (1-u)^(m-j) du over [a, b] (0 <= a < b <= 1,
// m >= 1, 0 <= j <= m), minus ln C(m, j) - m H(j/m). With q = j/m rounded
// and r = j - m q (RoundedRate), the integrand over that constant is
// exp(-m kl(q || u) + r ln(u (1-q) / (q (1-u)))) (as in LogPmf); it is evaluated at
// offsets d = u - q, so that neither q + d nor the node positions are
// rounded next to the peak (at m = 2^53 the peak is 5e-9 wide). The integrand
// is log-concave with its peak at q, so the integral is taken outward from
// c = clamp(q, a, b) (its largest value on [a, b]) in Gauss-Legendre
// segments whose width follows the local scale 1 / (|l'| + sqrt|l''|) of the
// exponent l, until the integrand has fallen kQuadratureDrop below its value
// at c or the range ends. At most kQuadratureSegments segments per direction
// (a few dozen are used); nullopt if that was not enough.
std::optional<double> LogPowerIntegral(double m, double j, double a, double b) {
  const RoundedRate rate = Rate(m, j);
  const double q = rate.q;
  const double r = rate.r;
  const auto exponent = [&](double d) {
    if (r == 0.0) return -m * KlAtOffset(q, d);
    double log_odds_ratio = 0.0;
    const double kl = KlAtOffset(q, d, &log_odds_ratio);
    return -m * kl + r * log_odds_ratio;
  };
  const double lo = a - q;
  const double hi = b - q;
  const double c = std::clamp(0.0, lo, hi);
  const double l_c = exponent(c);
  const auto log_g = [&](double d) { return exponent(d) - l_c; };
  // 1 / (|l'(u)| + sqrt(|l''(u)|)) at u = q + d: l'(u) = -m d / (u (1 - u)),
  // l''(u) = -m (q / u^2 + (1 - q) / (1 - u)^2).
  const auto scale = [&](double d) {
    const double u = std::clamp(q + d, 1e-300, 1.0 - 0x1p-53);
    const double d1 = m * std::fabs(d) / (u * (1.0 - u));
    const double d2 = m * (q / (u * u) + (1.0 - q) / ((1.0 - u) * (1.0 - u)));
    return 1.0 / (d1 + std::sqrt(d2));
  };
  double sum = 0.0;
  bool complete = true;
  // One direction: from c toward `end` (dir = +1 right, -1 left).
  const auto sweep = [&](double end, double dir) {
    double x = c;
    for (int segment = 0; segment < kQuadratureSegments; ++segment) {
      if (dir > 0 ? x >= end : x <= end) return;
      double next = x + dir * 4.0 * scale(x);
      if (dir > 0 ? next > end : next < end) next = end;
      if (next == x) return;
      const double mid = 0.5 * (x + next);
      const double half = 0.5 * (next - x);
      double part = 0.0;
      for (const auto& [node, weight] : kGaussLegendre20) {
        part += weight * (std::exp(log_g(mid + half * node)) + std::exp(log_g(mid - half * node)));
      }
      sum += std::fabs(half) * part;
      x = next;
      if (log_g(x) < -kQuadratureDrop) return;
    }
    complete = false;
  };
  if (c < hi) sweep(hi, 1.0);
  if (c > lo) sweep(lo, -1.0);
  if (!complete || !(sum > 0.0)) return std::nullopt;
  return l_c + std::log(sum);
}

// ln P(Bin(n, p) <= k) (upper_tail false; k < n) or ln P(Bin(n, p) >= k)
// (upper_tail true; k >= 1) by quadrature, for counts where the tail's terms
// fall too slowly to sum (near the mode, at large n): the incomplete-beta
// identities P(X <= k) = n C(n-1, k) Int_p^1 u^k (1-u)^(n-1-k) du and
// P(X >= k) = n C(n-1, k-1) Int_0^p u^(k-1) (1-u)^(n-k) du (e.g. Johnson,
// Kemp & Kotz 2005, Univariate Discrete Distributions, section 3.6), so
// ln P = ln n + [ln C(m, j) - m H(j/m)] + LogPowerIntegral(m, j, ...) with
// m = n - 1 and j the power of u: every part keeps its relative precision at
// n = 2^53. Where j > 3m/4 and p >= 1/2 the mirror image (n - k, 1 - p,
// exact there) is integrated instead. Relative error about 1e-14 (checked
// against mpmath in tests/reference/tail_limits_test.py). nullopt where the
// segments did not suffice. REQUIRES: n >= 2, 0 < p < 1.
std::optional<double> LogTailQuadrature(std::uint64_t n, std::uint64_t k, double p,
                                        bool upper_tail) {
  const double m = static_cast<double>(n - 1);
  const double j = static_cast<double>(upper_tail ? k - 1 : k);
  if (j > 0.75 * m && p >= 0.5) {
    // P(X <= k; p) = P(n - X >= n - k; 1 - p) and P(X >= k; p) = P(n - X <= n - k; 1 - p).
    return LogTailQuadrature(n, n - k, 1.0 - p, !upper_tail);
  }
  const std::optional<double> log_integral =
      upper_tail ? LogPowerIntegral(m, j, 0.0, p) : LogPowerIntegral(m, j, p, 1.0);
  if (!log_integral.has_value()) return std::nullopt;
  return std::log(static_cast<double>(n)) + LogChooseMinusEntropy(m, j) + *log_integral;
}

// Bounds on ln P(Bin(n, p) <= k) (upper_tail false) or ln P(Bin(n, p) >= k)
// (upper_tail true), for p on the side where the tail's terms fall away from
// k (REQUIRES): p > k/(n+1) for the lower tail, p < (k+1)/(n+1) for the
// upper tail, and k >= 1 for the upper tail.
// `log_enough`: stop once the lower bound reaches it (the caller's question
// is then answered). Tries, in order: the log-space sum with kTailTermsFirst
// terms; up to 2^32 samples Boost.Math's capped CDF (an exact value, when it
// converges and is a normal double), above it the quadrature of
// LogTailQuadrature (Boost's CDF is slow and loses about six digits there);
// the log-space sum with kTailTermsMax terms (bounds). With `precise`, the
// quadrature is used at every size instead of Boost's CDF: the post-check of
// a limit asks it, so that the check does not rest on the method that found
// the limit.
LogBounds LogTailBounds(std::uint64_t n, std::uint64_t k, double p, bool upper_tail,
                        double log_enough, bool precise = false) {
  const double nd = static_cast<double>(n);
  const double kd = static_cast<double>(k);
  const double log_first = LogPmf(nd, kd, p);
  const double m = upper_tail ? nd - kd : kd;
  const double odds = upper_tail ? p / (1.0 - p) : (1.0 - p) / p;
  // exp() of the gap to the threshold, capped so it stays finite.
  const double enough = std::exp(std::min(log_enough - log_first, 700.0));
  // The first ratio r bounds every later one, so the first kTailTermsFirst
  // terms cover at most kTailTermsFirst terms' worth: when that sum cannot
  // reach `enough` and r^kTailTermsFirst is not even below 2^-56 (near the
  // mode at large n), the sum is skipped, not tried.
  const double first_ratio = m / (nd - m + 1.0) * odds;
  const bool hopeless =
      enough > static_cast<double>(kTailTermsFirst) &&
      static_cast<double>(kTailTermsFirst) * std::log(first_ratio) > std::log(kTailNegligible);
  LogBounds s{-std::numeric_limits<double>::infinity(), 0.0};
  if (!hopeless) {
    s = LogTailRatioSum(nd, m, odds, enough, kTailTermsFirst);
    if (s.Converged() || s.lower + log_first >= log_enough) {
      return {log_first + s.lower, log_first + s.upper};
    }
  }
  if (!precise && nd <= kBoostInverseMaxSamples) {
    try {
      const Binomial bin(nd, p);
      const double v = upper_tail ? boost::math::cdf(boost::math::complement(bin, kd - 1.0))
                                  : boost::math::cdf(bin, kd);
      if (std::isfinite(v) && v > 0.0 && v <= 1.0 && std::log(v) > kLogNormalMin) {
        return {std::log(v), std::log(v)};
      }
    } catch (const std::exception&) {
      // Boost gave up within its caps: the quadrature answers.
    }
  }
  if (n >= 2 && p > 0.0 && p < 1.0) {
    if (const std::optional<double> v = LogTailQuadrature(n, k, p, upper_tail);
        v.has_value() && std::isfinite(*v)) {
      const double clipped = std::min(*v, 0.0);
      return {clipped, clipped};
    }
  }
  s = LogTailRatioSum(nd, m, odds, enough, kTailTermsMax);
  return {log_first + s.lower, log_first + s.upper};
}

// ln 1/2: below a failure probability of 1/2 the limits lie on their own
// side of k/n (the median of Bin(n, k/n) is k; Kaas & Buhrman 1980).
constexpr double kLogHalf = -0.69314718055994531;

// Bounds on ln P(Bin(n, p) <= k) (upper_tail false) or ln P(Bin(n, p) >= k)
// (upper_tail true) at any p: the tail itself where its terms fall away from
// k, else one minus the complementary tail (which then has that property).
// `log_enough` as in LogTailBounds (a threshold for the tail asked about).
LogBounds AnyTailBounds(std::uint64_t n, std::uint64_t k, double p, bool upper_tail,
                        double log_enough, bool precise = false) {
  if (upper_tail ? k == 0 : k >= n) return {0.0, 0.0};
  const double s = p * (static_cast<double>(n) + 1.0);
  const double kd = static_cast<double>(k);
  // Near the mode a tail falls slowly (millions of terms at huge n), but the
  // median gives a lower bound at the cost of one term: a median of
  // Bin(n, p) lies in [floor(np), ceil(np)] (Kaas & Buhrman 1980), so
  // P(X >= k) >= 1/2 - (k - floor(np)) t_max and P(X <= k) >= 1/2 -
  // (ceil(np) - k) t_max, t_max the largest term (at floor((n+1)p)).
  double log_median_lower = -std::numeric_limits<double>::infinity();
  if (p > 0.0 && p < 1.0) {
    const double nd = static_cast<double>(n);
    const double mean = p * nd;
    const double gap = upper_tail ? kd - std::floor(mean) : std::ceil(mean) - kd;
    double lower = 0.5;
    if (gap > 0.0) {
      const double mode = std::min(std::floor(s), nd);
      lower = 0.5 - gap * std::exp(LogPmf(nd, mode, p));
    }
    if (lower > 0.0) log_median_lower = std::log(lower);
    // A question "does it reach delta?" with delta below the bound is settled.
    if (log_median_lower >= log_enough) return {log_median_lower, 0.0};
  }
  const auto with_median = [&](LogBounds b) {
    b.upper = std::min(b.upper, 0.0);
    if (std::isnan(b.lower)) b.lower = -std::numeric_limits<double>::infinity();
    if (log_median_lower > b.lower) b.lower = std::min(log_median_lower, b.upper);
    return b;
  };
  if (upper_tail ? s < kd + 1.0 : s > kd) {
    return with_median(LogTailBounds(n, k, p, upper_tail, log_enough, precise));
  }
  // Complement: P(X <= k) = 1 - P(X >= k + 1); P(X >= k) = 1 - P(X <= k - 1).
  // Asked whether the tail reaches exp(log_enough), the complement answers
  // "no" once its own lower bound reaches 1 - exp(log_enough).
  const double complement_enough = log_enough < 0.0 ? std::log(-std::expm1(log_enough))
                                                    : std::numeric_limits<double>::infinity();
  const LogBounds c =
      LogTailBounds(n, upper_tail ? k - 1 : k + 1, p, !upper_tail, complement_enough, precise);
  // ln(1 - e^x) for the complement's bounds; an upper bound of 1 or more on
  // the complement leaves no lower bound here.
  const auto log_one_minus = [](double x) {
    return x >= 0.0 ? -std::numeric_limits<double>::infinity() : std::log(-std::expm1(x));
  };
  return with_median({log_one_minus(c.upper), log_one_minus(c.lower)});
}

// |d ln P / dp| at p for the tail whose ln is log_tail: d/dp P(X <= k) =
// -(n - k)/(1 - p) P(X = k) (upper_tail false), d/dp P(X >= k) = (k/p) P(X = k)
// (upper_tail true), divided by P; capped at e^700.
double TailLogSlope(std::uint64_t n, std::uint64_t k, double p, bool upper_tail,
                    double log_tail) {
  const double nd = static_cast<double>(n);
  const double kd = static_cast<double>(k);
  const double factor = upper_tail ? kd / p : (nd - kd) / (1.0 - p);
  const double log_slope = std::log(factor) + LogPmf(nd, kd, p) - log_tail;
  return std::exp(std::min(log_slope, 700.0));
}

// A decision "is the limit beyond eps?" taken from one tail evaluation at
// eps is trusted when ln of the tail is further from ln delta than the
// limit's own bisection tolerance (1e-12 relative in p) can move it: the
// slope d ln P / dp at eps times 1e-12 eps, doubled. The slope is exact:
// d/dp P(X <= k) = -(n - k)/(1 - p) P(X = k), d/dp P(X >= k) = (k/p) P(X = k),
// divided by the lower bound on P (the larger slope).
double DecideMargin(std::uint64_t n, std::uint64_t k, double eps, bool upper_tail,
                    double log_tail_lower) {
  return 1e-13 + 2.0 * kBisectionTolerance * eps * TailLogSlope(n, k, eps, upper_tail,
                                                                 log_tail_lower);
}

// Is ln P(tail) >= log_delta? Yes, no, or unsure (the bounds straddle it).
enum class Answer { kYes, kNo, kUnsure };

Answer TailAtLeast(std::uint64_t n, std::uint64_t k, double p, bool upper_tail,
                   double log_delta) {
  const LogBounds b = AnyTailBounds(n, k, p, upper_tail, log_delta);
  if (b.lower >= log_delta) return Answer::kYes;
  if (b.upper < log_delta) return Answer::kNo;
  return Answer::kUnsure;
}


// The Clopper-Pearson upper limit by bisection: the largest p with
// P(Bin(n, p) <= k) >= delta. Bracket: the Chernoff bound P(Bin(n, p) <= k)
// <= exp(-n kl(k/n || p)) makes the kl limit an upper end; k/n is a lower
// end for delta <= 1/2, else the mirror-image Chernoff bound on
// P(X >= k + 1). At most ~100 steps (geometric midpoints while the bracket
// spans orders of magnitude, then 1e-12 relative). An unsure step counts as
// "at least delta" (moving the limit up, the conservative side) and clears
// exact. REQUIRES: 1 <= k < n, log_delta < 0.
TailLimit UpperLimitSearch(std::uint64_t n, std::uint64_t k, double log_delta) {
  const double nd = static_cast<double>(n);
  const double q = static_cast<double>(k) / nd;
  double lo = q;
  if (log_delta > kLogHalf) {
    lo = KlInverseLower((static_cast<double>(k) + 1.0) / nd,
                        -std::log(-std::expm1(log_delta)) / nd);
  }
  double hi = KlInverseUpper(q, -log_delta / nd);
  bool exact = true;
  while (!BracketClosed(lo, hi)) {
    const double mid = Mid(lo, hi);
    if (mid <= lo || mid >= hi) break;
    const Answer a = TailAtLeast(n, k, mid, /*upper_tail=*/false, log_delta);
    if (a == Answer::kNo) {
      hi = mid;
    } else {
      lo = mid;
      if (a == Answer::kUnsure) exact = false;
    }
  }
  return {hi, exact};
}

// The Clopper-Pearson lower limit by bisection: the smallest p with
// P(Bin(n, p) >= k) >= delta. Mirror image of UpperLimitSearch (an unsure
// step moves the limit down). REQUIRES: 1 <= k < n, log_delta < 0.
TailLimit LowerLimitSearch(std::uint64_t n, std::uint64_t k, double log_delta) {
  const double nd = static_cast<double>(n);
  const double q = static_cast<double>(k) / nd;
  double lo = KlInverseLower(q, -log_delta / nd);
  double hi = q;
  if (log_delta > kLogHalf) {
    hi = KlInverseUpper((static_cast<double>(k) - 1.0) / nd,
                        -std::log(-std::expm1(log_delta)) / nd);
  }
  bool exact = true;
  if (lo <= 0.0) {
    // The kl limit underflowed: start from the smallest normal double, or
    // report 0 when even there the tail reaches delta (the limit is below it).
    lo = std::numeric_limits<double>::min();
    if (TailAtLeast(n, k, lo, /*upper_tail=*/true, log_delta) != Answer::kNo) {
      return {0.0, true};
    }
  }
  while (!BracketClosed(lo, hi)) {
    const double mid = Mid(lo, hi);
    if (mid <= lo || mid >= hi) break;
    const Answer a = TailAtLeast(n, k, mid, /*upper_tail=*/true, log_delta);
    if (a == Answer::kNo) {
      lo = mid;
    } else {
      hi = mid;
      if (a == Answer::kUnsure) exact = false;
    }
  }
  return {lo, exact};
}

// The post-check of every returned limit keeps the tail at the limit this far
// (in nats) inside delta: it covers the rounding of the tail itself (sums,
// quadrature and the Stirling terms, each good to about 1e-15 of ln P), so a
// limit that passes is on the conservative side of the exact one.
double CheckMargin(double log_delta) { return 2e-14 + 4e-16 * std::fabs(log_delta); }

// Outward steps the post-check may take (each twice the last, from one ulp:
// 2^64 ulps in all, far more than any limit can be off by).
constexpr int kMaxNudges = 64;

// The post-check starts from the value found moved outward by a step that
// normally makes its first check pass: twice the check's margin (in nats of
// the tail) over the slope of ln P there, plus kPriorUlps ulps for the
// rounding of the inversion that found it. After a failed check, one Newton
// step on ln P (from the failed check's own tail value, overshooting by half
// again) is tried. Both are capped at kNewtonCap of the value: far inside the
// planners' decision band (DecideMargin: 2e-12 of the value), so a plan's
// "is the limit at most eps?" agrees with the limit reported. Beyond that the
// outward nudges of 1, 2, 4, ... ulps take over. On 2 000 hold-out records
// (n from 100 to 10^6, bench/certify_bench's BM_CoreVsScipy records) the
// first check passed for all 4 000 limits, and the values moved out by at
// most 5e-14 relative; when each check started at the value found, 262
// of the 4 000 passed at once and a limit cost 4.3 tail evaluations on
// average. Boost's inversion keeps its long double evaluation: in double it
// is about three times faster but off by more than 1e-10 (outward, which
// the check cannot see) at some counts (tests/reference/tail_limits_test.py).
constexpr double kPriorUlps = 8.0;
constexpr double kNewtonCap = 1e-13;

// The outward distance to try from v (0 < v < 1) when ln P(v) is `excess`
// nats above `target` (0 for the first try, where P(v) is about delta): the
// Newton step for the excess plus the margin, overshot by half, plus
// kPriorUlps ulps; capped at kNewtonCap of min(v, 1 - v), kPriorUlps ulps
// where the slope is not a positive finite number, and 0 (no step: the
// exact nudges decide) where that cap is below kPriorUlps ulps.
double OutwardStep(std::uint64_t n, std::uint64_t k, double v, bool upper_limit,
                   double log_tail, double excess, double margin) {
  const double ulp = std::nextafter(v, 2.0) - v;
  // Relative to the nearer end: next to 1 an upper limit's ulps are large
  // against its distance 1 - v, and the exact nudges below serve it better.
  const double cap = kNewtonCap * std::min(v, 1.0 - v);
  if (!(cap >= kPriorUlps * ulp)) return 0.0;
  double step = kPriorUlps * ulp;
  const double slope = TailLogSlope(n, k, v, /*upper_tail=*/!upper_limit, log_tail);
  if (std::isfinite(slope) && slope > 0.0) step += 1.5 * (excess + 2.0 * margin) / slope;
  return std::min(step, cap);
}

// The post-check of an upper limit: a value u at or above t.value whose tail
// P(Bin(n, u) <= k), computed independently of the method that found the
// limit (LogTailBounds with `precise`), is at most delta with CheckMargin to
// spare. First tries: t.value moved out by OutwardStep, then one Newton step
// further; then outward steps of 1, 2, 4, ... ulps and a bisection back, so
// the value is the smallest double found to hold there, up to 1. So the
// value is never below the exact Clopper-Pearson limit, whatever rounding
// Boost's inversion or the search made. Where no nudge settles it, the
// kl-Chernoff limit (which always holds, Chernoff 1952) with exact = false.
// REQUIRES: k < n.
TailLimit CheckedUpper(std::uint64_t n, std::uint64_t k, double log_delta, TailLimit t) {
  const double margin = CheckMargin(log_delta);
  const double target = log_delta - margin;
  const auto log_tail = [&](double u) {
    return AnyTailBounds(n, k, u, /*upper_tail=*/false, std::numeric_limits<double>::infinity(),
                         /*precise=*/true)
        .upper;
  };
  const auto holds = [&](double u) {
    if (u >= 1.0) return true;
    if (u <= 0.0) return false;
    return log_tail(u) <= target;
  };
  double u = std::clamp(t.value, 0.0, 1.0);
  const double prior = u > 0.0 && u < 1.0 ? OutwardStep(n, k, u, true, log_delta, 0.0, margin)
                                          : 0.0;
  if (prior > 0.0) {
    // The step's cap keeps u + prior below 1.
    const double first = u + prior;
    const double at_first = log_tail(first);
    if (at_first <= target) return {first, t.exact};
    u = first;  // failed
    const double newton = OutwardStep(n, k, first, true, at_first, at_first - target, margin);
    if (newton > 0.0) {
      if (holds(first + newton)) return {first + newton, t.exact};
      u = first + newton;  // failed
    }
  } else if (holds(u)) {
    return {u, t.exact};
  }
  // Nudge outward by 1, 2, 4, ... ulps until the check holds, then bisect
  // back between the last value that failed and the first that held, so the
  // result is the smallest double found to hold, not up to twice as far out.
  double failed = u;
  double step = std::nextafter(u, 2.0) - u;
  for (int i = 0; i < kMaxNudges; ++i) {
    const double next = std::min(1.0, failed + step);
    if (holds(next)) {
      double good = next;
      while (true) {
        const double mid = failed + (good - failed) / 2.0;
        if (mid <= failed || mid >= good) break;
        (holds(mid) ? good : failed) = mid;
      }
      return {good, t.exact};
    }
    failed = next;
    step *= 2.0;
  }
  const double kl = KlInverseUpper(static_cast<double>(k) / static_cast<double>(n),
                                   -log_delta / static_cast<double>(n));
  return {std::max(kl, t.value), false};
}

// The post-check of a lower limit, mirrored: a value at or below t.value
// that holds P(Bin(n, p) >= k) <= delta (with the margin), found as in
// CheckedUpper, down to 0; 0 once below the smallest normal double.
// REQUIRES: k >= 1.
TailLimit CheckedLower(std::uint64_t n, std::uint64_t k, double log_delta, TailLimit t) {
  const double margin = CheckMargin(log_delta);
  const double target = log_delta - margin;
  const auto log_tail = [&](double l) {
    return AnyTailBounds(n, k, l, /*upper_tail=*/true, std::numeric_limits<double>::infinity(),
                         /*precise=*/true)
        .upper;
  };
  const auto holds = [&](double l) {
    if (l < std::numeric_limits<double>::min()) return true;  // reported as 0
    if (l >= 1.0) return false;
    return log_tail(l) <= target;
  };
  const auto result = [&](double l) {
    return TailLimit{l < std::numeric_limits<double>::min() ? 0.0 : l, t.exact};
  };
  double l = std::clamp(t.value, 0.0, 1.0);
  const double prior = l >= std::numeric_limits<double>::min() && l < 1.0
                           ? OutwardStep(n, k, l, false, log_delta, 0.0, margin)
                           : 0.0;
  if (prior > 0.0) {
    // The step's cap keeps l - prior above 0.
    const double first = l - prior;
    if (first < std::numeric_limits<double>::min()) return result(first);
    const double at_first = log_tail(first);
    if (at_first <= target) return result(first);
    l = first;  // failed
    const double newton = OutwardStep(n, k, first, false, at_first, at_first - target, margin);
    if (newton > 0.0) {
      if (holds(first - newton)) return result(first - newton);
      l = first - newton;  // failed
    }
  } else if (holds(l)) {
    return result(l);
  }
  double failed = l;
  double step = l - std::nextafter(l, -1.0);
  for (int i = 0; i < kMaxNudges; ++i) {
    const double next = std::max(0.0, failed - step);
    if (holds(next)) {
      double good = next;
      while (true) {
        const double mid = good + (failed - good) / 2.0;
        if (mid <= good || mid >= failed) break;
        (holds(mid) ? good : failed) = mid;
      }
      return result(good);
    }
    failed = next;
    step *= 2.0;
  }
  const double kl = KlInverseLower(static_cast<double>(k) / static_cast<double>(n),
                                   -log_delta / static_cast<double>(n));
  return {std::min(kl, t.value), false};
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
  const double first = WeightedXMinusLog1p(q, d, [&] { return LogRatio(p, q); });
  const double second = WeightedXMinusLog1p(
      1.0 - q, -d, [&] { return std::log1p(-p) - std::log1p(-q); });
  return first + second;
}

double KlInverseUpper(double q, double c) {
  if (c <= 0.0) return q;
  if (q >= 1.0) return 1.0;
  if (q <= 0.0) return -std::expm1(-c);
  // Invariant: kl(q||lo) <= c < kl(q||hi); kl(q||1) is infinite.
  double lo = q;
  double hi = 1.0;
  while (!BracketClosed(lo, hi)) {
    const double mid = Mid(lo, hi);
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
  // kl(q||p) >= q ln(q/p) + (1-q) ln(1-q), which exceeds c below
  // p0 = q exp(((1-q) ln(1-q) - c) / q): the limit is at least p0.
  double lo = q * std::exp(((1.0 - q) * std::log1p(-q) - c) / q);
  if (!(lo > 0.0)) {
    lo = std::numeric_limits<double>::min();
    if (BernoulliKl(q, lo) <= c) return 0.0;  // the limit is below DBL_MIN
  }
  // Invariant: kl(q||lo) > c >= kl(q||hi).
  double hi = q;
  while (!BracketClosed(lo, hi)) {
    const double mid = Mid(lo, hi);
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
  const double log_delta = std::log(delta);
  if (k == 0) return CheckedUpper(n, k, log_delta, {-std::expm1(log_delta / nd), true});
  if (nd <= kBoostInverseMaxSamples) {
    try {
      const double v = Binomial::find_upper_bound_on_p(nd, static_cast<double>(k), delta);
      if (FiniteProbability(v)) return CheckedUpper(n, k, log_delta, {v, true});
    } catch (const std::exception&) {
      // Boost gave up within its caps: search in log space instead.
    }
  }
  return CheckedUpper(n, k, log_delta, UpperLimitSearch(n, k, log_delta));
}

TailLimit BinomialLowerLimit(std::uint64_t n, std::uint64_t k, double delta) {
  if (k == 0) return {0.0, true};
  const double nd = static_cast<double>(n);
  const double log_delta = std::log(delta);
  if (k >= n) return CheckedLower(n, k, log_delta, {std::exp(log_delta / nd), true});
  if (nd <= kBoostInverseMaxSamples) {
    try {
      const double v = Binomial::find_lower_bound_on_p(nd, static_cast<double>(k), delta);
      if (FiniteProbability(v)) return CheckedLower(n, k, log_delta, {v, true});
    } catch (const std::exception&) {
      // Boost gave up within its caps: search in log space instead.
    }
  }
  return CheckedLower(n, k, log_delta, LowerLimitSearch(n, k, log_delta));
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
  if (p >= 1.0) return -std::numeric_limits<double>::infinity();
  return AnyTailBounds(n, k, p, /*upper_tail=*/false, std::numeric_limits<double>::infinity())
      .upper;
}


bool UpperLimitAtMost(std::uint64_t n, std::uint64_t k, double delta, double eps) {
  if (k >= n) return eps >= 1.0;
  if (eps >= 1.0) return true;
  if (eps <= 0.0) return false;
  if (k == 0) return BinomialUpperLimit(n, k, delta).value <= eps;  // closed form
  // The limit exceeds k/n (k < n), so it exceeds eps when k/n >= eps.
  if (static_cast<double>(k) >= eps * static_cast<double>(n)) return false;
  // u <= eps  <=>  P(Bin(n, eps) <= k) <= delta (the tail falls in p); the
  // reported limit holds the post-check's margin, so the decision does too.
  const double log_delta = std::log(delta) - CheckMargin(std::log(delta));
  const LogBounds b = AnyTailBounds(n, k, eps, /*upper_tail=*/false, log_delta + 1e-6);
  const double margin = DecideMargin(n, k, eps, /*upper_tail=*/false, b.lower);
  if (b.upper < log_delta - margin) return true;
  if (b.lower > log_delta + margin) return false;
  return BinomialUpperLimit(n, k, delta).value <= eps;
}

bool LowerLimitAbove(std::uint64_t n, std::uint64_t k, double delta, double eps) {
  if (k == 0) return eps < 0.0;
  if (eps < 0.0) return true;
  if (eps >= 1.0) return false;
  if (k >= n) return BinomialLowerLimit(n, k, delta).value > eps;  // closed form
  // The limit is below k/n (k >= 1), so it is not above eps when k/n <= eps.
  if (static_cast<double>(k) <= eps * static_cast<double>(n)) return false;
  if (eps <= 0.0) return true;  // the limit is positive for k >= 1
  // l > eps  <=>  P(Bin(n, eps) >= k) < delta (the tail grows in p), with
  // the post-check's margin as above.
  const double log_delta = std::log(delta) - CheckMargin(std::log(delta));
  const LogBounds b = AnyTailBounds(n, k, eps, /*upper_tail=*/true, log_delta + 1e-6);
  const double margin = DecideMargin(n, k, eps, /*upper_tail=*/true, b.lower);
  if (b.upper < log_delta - margin) return true;
  if (b.lower > log_delta + margin) return false;
  return BinomialLowerLimit(n, k, delta).value > eps;
}

double BinomialTailLowerBound(std::uint64_t n, std::uint64_t k, double p, BinomialTail tail,
                              bool* exact) {
  const bool upper = tail == BinomialTail::kAtLeast;
  if (upper) {
    if (k == 0) return 1.0;
    if (k > n || p <= 0.0) return 0.0;
    if (p >= 1.0) return 1.0;
  } else {
    if (k >= n || p <= 0.0) return 1.0;
    if (p >= 1.0) return 0.0;
  }
  const LogBounds b = AnyTailBounds(n, k, p, upper, std::numeric_limits<double>::infinity());
  if (!b.Converged() && exact != nullptr) *exact = false;
  const double v = std::exp(b.lower);
  return v >= 0.0 ? std::min(v, 1.0) : 0.0;  // never NaN
}

TailLimit BinomialUpperLimitLogDelta(std::uint64_t n, std::uint64_t k,
                                     double log_delta) {
  if (k >= n) return {1.0, true};
  const double nd = static_cast<double>(n);
  if (k == 0) return CheckedUpper(n, k, log_delta, {-std::expm1(log_delta / nd), true});
  // exp() of anything above ln(DBL_MIN) ~ -708.4 is a normal double.
  if (log_delta > kLogNormalMin) return BinomialUpperLimit(n, k, std::exp(log_delta));
  return CheckedUpper(n, k, log_delta, UpperLimitSearch(n, k, log_delta));
}

absl::StatusOr<std::uint64_t> SmallestSatisfying(
    std::uint64_t lo, std::uint64_t hi, const std::function<bool(std::uint64_t)>& ok,
    std::optional<std::uint64_t> guess) {
  const auto not_found = [] {
    return absl::NotFoundError("no value in the search range satisfies the target");
  };
  if (!guess.has_value()) {
    if (!ok(hi)) return not_found();
    guess = lo;
  }
  const std::uint64_t start = std::clamp(*guess, lo, hi);
  // Steps double (saturating), so a bracket is found in about log2 of the
  // distance from the start.
  const auto next_step = [](std::uint64_t step) {
    return step > std::numeric_limits<std::uint64_t>::max() / 2 ? step : step * 2;
  };
  // A bracket (bad, good] with ok(good) and not ok(bad).
  std::uint64_t good = start;
  std::uint64_t bad = 0;
  std::uint64_t step = 1;
  if (ok(start)) {
    while (true) {
      if (good == lo) return lo;
      const std::uint64_t probe = good - lo > step ? good - step : lo;
      if (!ok(probe)) {
        bad = probe;
        break;
      }
      good = probe;
      step = next_step(step);
    }
  } else {
    bad = start;
    while (true) {
      if (bad == hi) return not_found();
      const std::uint64_t probe = hi - bad > step ? bad + step : hi;
      if (ok(probe)) {
        good = probe;
        break;
      }
      bad = probe;
      step = next_step(step);
    }
  }
  while (good - bad > 1) {
    const std::uint64_t mid = bad + (good - bad) / 2;
    (ok(mid) ? good : bad) = mid;
  }
  return good;
}

}  // namespace riskbound::core
