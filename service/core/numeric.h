// Numerical building blocks shared by every bound family.
//
// Start here when a family needs a binomial tail inversion, a Bernoulli KL
// inverse or a log binomial coefficient. Everything in this header is a pure
// function of its arguments: thread-safe, no allocation, no global state.
#ifndef RISKBOUND_SERVICE_CORE_NUMERIC_H_
#define RISKBOUND_SERVICE_CORE_NUMERIC_H_

#include <cstdint>
#include <functional>
#include <optional>

#include "absl/status/statusor.h"

namespace riskbound::core {

// Tolerance of every bisection in this header: absolute on probabilities,
// relative to the limit when the limit is below 1, and relative to 1 - limit
// when that is below 1.
inline constexpr double kBisectionTolerance = 1e-12;

// BernoulliKl
// Returns kl(q || p) = q ln(q/p) + (1-q) ln((1-q)/(1-p)) with 0 ln 0 = 0.
// Returns +infinity where p is 0 or 1 and q differs from it.
// REQUIRES: q and p in [0, 1].
double BernoulliKl(double q, double p);

// KlInverseUpper
// Returns sup { p in [q, 1] : kl(q || p) <= c }, found by bisection to
// kBisectionTolerance (absolute, and relative to the result) and rounded to
// the conservative (larger) end. Geometric midpoints while the bracket spans
// orders of magnitude, so at most ~100 steps for any q.
// c <= 0 returns q; q = 1 returns 1; q = 0 uses the closed form 1 - exp(-c).
// REQUIRES: q in [0, 1]; c not NaN.
double KlInverseUpper(double q, double c);

// KlInverseLower
// Returns inf { p in [0, q] : kl(q || p) <= c }, rounded to the conservative
// (smaller) end, at most ~100 steps (the bracket starts at a closed-form lower
// end). Returns 0 when the limit is below the smallest normal double.
// c <= 0 returns q; q = 0 returns 0.
// REQUIRES: q in [0, 1]; c not NaN.
double KlInverseLower(double q, double c);

// A binomial confidence limit and how it was obtained.
struct TailLimit {
  double value = 0.0;
  // True when the exact Clopper-Pearson limit was found (to a relative 1e-12,
  // on its conservative side); false only when the post-check below could not
  // settle the tail at the limit within 64 outward steps and the kl-Chernoff
  // limit (looser, still valid) stands in for it. No input of the tests'
  // grid (n from 10 to 2^53, delta down to the smallest positive double)
  // reaches that case.
  bool exact = true;
};

// BinomialUpperLimit
// One-sided Clopper-Pearson upper limit: the largest p with
// P(Bin(n, p) <= k) >= delta, i.e. the (1 - delta) quantile of
// Beta(k + 1, n - k), computed with Boost.Math's complement inverse (never as
// a quantile at 1 - delta), its iterations capped. k = 0 uses the closed form
// 1 - delta^(1/n); k = n returns 1. Where Boost gives up within its caps, and
// always above 2^32 samples, a bracketed bisection between the kl-Chernoff
// limit and k/n on the binomial tail takes over: the tail is summed in log
// space from the term at k where its terms fall fast, else computed by
// Gauss-Legendre quadrature of the incomplete-beta integral in log space.
// Post-check: whichever way the limit was found, the tail at it is
// recomputed (sum or quadrature, never Boost) and the limit moved outward
// (nextafter steps, then bisection back) until P(Bin(n, limit) <= k) <=
// delta holds with a margin for the tail's own rounding: the value is never
// below the exact limit (checked against mpmath on a grid of n from 10 to
// 2^53 and delta down to the smallest positive double:
// tests/reference/tail_limits_test.py). A limit that rounds to 1 is 1.
// Cost: bounded, under a few milliseconds at any admissible n, k and delta.
// REQUIRES: n >= 1, k <= n, 0 < delta < 1 (subnormal delta allowed).
TailLimit BinomialUpperLimit(std::uint64_t n, std::uint64_t k, double delta);

// BinomialLowerLimit
// One-sided Clopper-Pearson lower limit: the smallest p with
// P(Bin(n, p) >= k) >= delta. k = 0 returns 0. Methods and post-check as
// above, mirrored (never larger than the exact limit; 0 once below the
// smallest normal double).
// REQUIRES: n >= 1, k <= n, 0 < delta < 1.
TailLimit BinomialLowerLimit(std::uint64_t n, std::uint64_t k, double delta);

// BinomialUpperLimitLogDelta
// As BinomialUpperLimit, but the failure probability is given by its natural
// logarithm, for the tiny levels of union bounds (delta / C(m, d),
// delta * 2^-bits) that underflow a double. Uses BinomialUpperLimit while
// exp(log_delta) is a normal double, else the bracketed log-space search;
// the same post-check at log_delta either way.
// REQUIRES: n >= 1, k <= n, log_delta < 0.
TailLimit BinomialUpperLimitLogDelta(std::uint64_t n, std::uint64_t k,
                                     double log_delta);

// LogBinomialCdf
// Returns ln P(Bin(n, p) <= k), summed in log space from the term at k (or
// k + 1 for the complement) away from the mode while its terms fall fast (at
// most 1024 terms), else Boost's CDF (up to 2^32 samples) or the log-space
// quadrature of the incomplete-beta integral (above, or where Boost gives
// up); good to about 1e-14 relative; where none settles it, an upper bound.
// REQUIRES: k <= n, 0 <= p <= 1.
double LogBinomialCdf(std::uint64_t n, std::uint64_t k, double p);

// Which tail of Bin(n, p) a probability is about.
enum class BinomialTail {
  kAtMost,   // P(Bin(n, p) <= k): the CDF
  kAtLeast,  // P(Bin(n, p) >= k)
};

// BinomialTailLowerBound
// Returns a lower bound on the tail probability, equal to it to double
// precision unless *exact is set to false (left untouched otherwise; may be
// null): never more than the true value, so a pass probability is never
// overstated and a plan only grows. Same method and cost as LogBinomialCdf.
// kAtMost with k >= n and kAtLeast with k = 0 give 1.
// REQUIRES: 0 <= p <= 1; k <= n for kAtMost.
double BinomialTailLowerBound(std::uint64_t n, std::uint64_t k, double p, BinomialTail tail,
                              bool* exact = nullptr);

// UpperLimitAtMost
// Returns BinomialUpperLimit(n, k, delta).value <= eps, decided from one
// binomial tail at eps (the limit is at most eps iff P(Bin(n, eps) <= k) <=
// delta) where the tail is clearly on one side of delta (by more than the
// limit's own bisection tolerance moves it, from the exact slope of the tail
// in p), else by computing the limit; so it agrees with the reported limit
// at a fraction of the cost. For the planners' searches. REQUIRES: n >= 1, k <= n, 0 < delta < 1.
bool UpperLimitAtMost(std::uint64_t n, std::uint64_t k, double delta, double eps);

// LowerLimitAbove
// Returns BinomialLowerLimit(n, k, delta).value > eps, decided the same way
// (the limit exceeds eps iff P(Bin(n, eps) >= k) < delta).
// REQUIRES: n >= 1, k <= n, 0 < delta < 1.
bool LowerLimitAbove(std::uint64_t n, std::uint64_t k, double delta, double eps);

// LogChoose
// Returns ln C(n, k); never forms C(n, k). For large n the difference
// lgamma(n+1) - lgamma(n-k+1) is rewritten with log1p and Stirling's series so
// nothing large cancels: relative error ~1e-14 up to n = 2^53 (the plain
// lgamma difference is off by ~4 at n = 1e15).
// REQUIRES: 0 <= k <= n.
double LogChoose(double n, double k);

// SmallestSatisfying
// The one "smallest n such that" search of the core. For a monotone
// predicate (false ... false true ... true) on the integers [lo, hi], returns
// the smallest x with ok(x) true, or NOT_FOUND when there is none.
// Without a guess: ok(hi) first (NOT_FOUND at once when it is false), then an
// exponential search up from lo and a bisection: about 2 log2(x - lo) + 2
// calls. With a guess (clamped to [lo, hi]), where ok is costly far from it
// (bound evaluations at huge n): ok(hi) is never asked first; exponential
// steps away from the guess (down when ok(guess), up otherwise), then a
// bisection: about 2 log2|x - guess| + 1 calls, and NOT_FOUND once the steps
// up reach hi without success.
// REQUIRES: lo <= hi.
absl::StatusOr<std::uint64_t> SmallestSatisfying(
    std::uint64_t lo, std::uint64_t hi, const std::function<bool(std::uint64_t)>& ok,
    std::optional<std::uint64_t> guess = std::nullopt);

}  // namespace riskbound::core

#endif  // RISKBOUND_SERVICE_CORE_NUMERIC_H_
