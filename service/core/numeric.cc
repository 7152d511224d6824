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
// Above 2^32 samples the CDF, asked many times per search, gets a tighter
// series cap: where it would need more terms (near the mode) it gives up
// within tens of microseconds and the log-space bounds answer instead.
constexpr int kBoostCdfSeriesIterations = 1000;
using CdfBinomial = boost::math::binomial_distribution<
    double, boost::math::policies::policy<
                boost::math::policies::max_root_iterations<kBoostRootIterations>,
                boost::math::policies::max_series_iterations<kBoostCdfSeriesIterations>>>;

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

// ln P(Bin(n, p) = k) = [ln C(n, k) - n H(k/n)] - n kl(k/n || p): exact
// identity; both parts keep full relative precision, so the result is good
// to about 1e-15 of its size even at n = 2^53 (summing ln C(n, k), k ln p and
// (n - k) ln(1 - p) would lose everything to cancellation there).
double LogPmf(double n, double k, double p) {
  if (p <= 0.0) return k <= 0.0 ? 0.0 : -std::numeric_limits<double>::infinity();
  if (p >= 1.0) return k >= n ? 0.0 : -std::numeric_limits<double>::infinity();
  return LogChooseMinusEntropy(n, k) - n * BernoulliKl(k / n, p);
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

// Bounds on ln P(Bin(n, p) <= k) (upper_tail false) or ln P(Bin(n, p) >= k)
// (upper_tail true), for p on the side where the tail's terms fall away from
// k (REQUIRES): p > k/(n+1) for the lower tail, p < (k+1)/(n+1) for the
// upper tail, and k >= 1 for the upper tail.
// `log_enough`: stop once the lower bound reaches it (the caller's question
// is then answered). Tries, in order: the log-space sum with kTailTermsFirst
// terms; Boost.Math's capped CDF (an exact value, when it converges and is a
// normal double); the log-space sum with kTailTermsMax terms (bounds).
LogBounds LogTailBounds(std::uint64_t n, std::uint64_t k, double p, bool upper_tail,
                        double log_enough) {
  const double nd = static_cast<double>(n);
  const double kd = static_cast<double>(k);
  const double log_first = LogPmf(nd, kd, p);
  const double m = upper_tail ? nd - kd : kd;
  const double odds = upper_tail ? p / (1.0 - p) : (1.0 - p) / p;
  // exp() of the gap to the threshold, capped so it stays finite.
  const double enough = std::exp(std::min(log_enough - log_first, 700.0));
  LogBounds s = LogTailRatioSum(nd, m, odds, enough, kTailTermsFirst);
  if (s.Converged() || s.lower + log_first >= log_enough) {
    return {log_first + s.lower, log_first + s.upper};
  }
  // Above 2^32 samples Boost's CDF within one standard deviation of the mode
  // is both slow (up to ~0.1 s) and off by ~1e-6 relative (at 2^53): it is
  // not asked there; the sums' bounds (and the median bound of AnyTailBounds)
  // answer, or the step stays unsure.
  const bool near_mode_at_scale =
      nd > kBoostInverseMaxSamples &&
      std::fabs(kd - nd * p) < std::sqrt(nd * p * (1.0 - p));
  if (!near_mode_at_scale) try {
    double v = 0.0;
    if (nd <= kBoostInverseMaxSamples) {
      const Binomial bin(nd, p);
      v = upper_tail ? boost::math::cdf(boost::math::complement(bin, kd - 1.0))
                     : boost::math::cdf(bin, kd);
    } else {
      const CdfBinomial bin(nd, p);
      v = upper_tail ? boost::math::cdf(boost::math::complement(bin, kd - 1.0))
                     : boost::math::cdf(bin, kd);
    }
    if (std::isfinite(v) && v > 0.0 && v <= 1.0 && std::log(v) > kLogNormalMin) {
      return {std::log(v), std::log(v)};
    }
  } catch (const std::exception&) {
    // Boost gave up within its caps: bound the sum instead.
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
                        double log_enough) {
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
    return with_median(LogTailBounds(n, k, p, upper_tail, log_enough));
  }
  // Complement: P(X <= k) = 1 - P(X >= k + 1); P(X >= k) = 1 - P(X <= k - 1).
  // Asked whether the tail reaches exp(log_enough), the complement answers
  // "no" once its own lower bound reaches 1 - exp(log_enough).
  const double complement_enough = log_enough < 0.0 ? std::log(-std::expm1(log_enough))
                                                    : std::numeric_limits<double>::infinity();
  const LogBounds c =
      LogTailBounds(n, upper_tail ? k - 1 : k + 1, p, !upper_tail, complement_enough);
  // ln(1 - e^x) for the complement's bounds; an upper bound of 1 or more on
  // the complement leaves no lower bound here.
  const auto log_one_minus = [](double x) {
    return x >= 0.0 ? -std::numeric_limits<double>::infinity() : std::log(-std::expm1(x));
  };
  return with_median({log_one_minus(c.upper), log_one_minus(c.lower)});
}

// A decision "is the limit beyond eps?" taken from one tail evaluation at
// eps is trusted when ln of the tail is further from ln delta than the
// limit's own bisection tolerance (1e-12 relative in p) can move it: the
// slope d ln P / dp at eps times 1e-12 eps, doubled. The slope is exact:
// d/dp P(X <= k) = -(n - k)/(1 - p) P(X = k), d/dp P(X >= k) = (k/p) P(X = k),
// divided by the lower bound on P (the larger slope).
double DecideMargin(std::uint64_t n, std::uint64_t k, double eps, bool upper_tail,
                    double log_tail_lower) {
  const double nd = static_cast<double>(n);
  const double kd = static_cast<double>(k);
  const double factor = upper_tail ? kd / eps : (nd - kd) / (1.0 - eps);
  const double log_slope = std::log(factor) + LogPmf(nd, kd, eps) - log_tail_lower;
  return 1e-13 + 2.0 * kBisectionTolerance * eps * std::exp(std::min(log_slope, 700.0));
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
  if (k == 0) return {-std::expm1(std::log(delta) / nd), true};
  if (nd <= kBoostInverseMaxSamples) {
    try {
      const double v = Binomial::find_upper_bound_on_p(nd, static_cast<double>(k), delta);
      if (FiniteProbability(v)) return {v, true};
    } catch (const std::exception&) {
      // Boost gave up within its caps: search in log space instead.
    }
  }
  return UpperLimitSearch(n, k, std::log(delta));
}

TailLimit BinomialLowerLimit(std::uint64_t n, std::uint64_t k, double delta) {
  if (k == 0) return {0.0, true};
  const double nd = static_cast<double>(n);
  if (k >= n) return {std::exp(std::log(delta) / nd), true};
  if (nd <= kBoostInverseMaxSamples) {
    try {
      const double v = Binomial::find_lower_bound_on_p(nd, static_cast<double>(k), delta);
      if (FiniteProbability(v)) return {v, true};
    } catch (const std::exception&) {
      // Boost gave up within its caps: search in log space instead.
    }
  }
  return LowerLimitSearch(n, k, std::log(delta));
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
  // u <= eps  <=>  P(Bin(n, eps) <= k) <= delta (the tail falls in p).
  const double log_delta = std::log(delta);
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
  // l > eps  <=>  P(Bin(n, eps) >= k) < delta (the tail grows in p).
  const double log_delta = std::log(delta);
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
  if (k == 0) return {-std::expm1(log_delta / nd), true};
  // exp() of anything above ln(DBL_MIN) ~ -708.4 is a normal double.
  if (log_delta > kLogNormalMin) return BinomialUpperLimit(n, k, std::exp(log_delta));
  return UpperLimitSearch(n, k, log_delta);
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
