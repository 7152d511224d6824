// Anytime-valid hold-out bounds: confidence sequences for a binomial
// proportion that hold simultaneously for every sample size, so the same
// failure probability covers any number of looks at a growing hold-out set.
//
// Construction (one-sided beta-binomial mixture martingale):
// for a tested error rate p0, mix the likelihood ratio of the n hold-out
// outcomes (k errors) over a Beta(c p0, c (1 - p0)) prior on the alternative
// rate p, truncated to the side of p0 the bound guards against (p < p0 for
// the upper limit, p > p0 for the lower one):
//
//   M_n(p0) = [ integral over the side of p^k (1-p)^(n-k) prior(p) dp ]
//             / [ p0^k (1-p0)^(n-k) * prior mass of the side ].
//
// Under the rate p0, M_n(p0) is a nonnegative martingale with M_0 = 1
// (Robbins 1970, mixtures of likelihood ratios), so by Ville's maximal
// inequality (Ville 1939) P(M_n(p0) >= 1/delta for some n) <= delta. The
// upper limit U_n = sup{p0 : M_n(p0) < 1/delta} therefore satisfies
// P(true rate > U_n for some n) <= delta, whatever rule decides when to look
// or stop. The one-sided (truncated) form and the tuning of the mixture to a
// planned sample size follow Howard, Ramdas, McAuliffe & Sekhon (2021),
// "Time-uniform, nonparametric, nonasymptotic confidence sequences",
// Ann. Statist. 49(2). A component tuned for the sample size n0 has the
// prior concentration
//   c = n0 / (2 ln(1/delta) + ln(1 + 2 ln(1/delta))),
// their normal-mixture tuning rule for the intrinsic time n0 (the size at
// which the component is tightest) moved to the beta prior's "prior sample
// size". The prior used is the equal-weight mixture of five such components,
// n0 = 10^2, 10^3, 10^4, 10^5, 10^6 (kAnytimeTunedSampleCounts): a mixture of
// priors is a prior, so M_n is still a martingale, and the bound stays
// within about 1.7-1.8x the fixed-n width from 100 to 100,000 samples, where
// one component tuned for 10^4 costs 6.6x at 100 (tests/soundness/REPORT.md).
// The tunings are constants fixed in the code (before any data): nothing of
// the construction is chosen from the counts. The prior may depend on p0
// (the hypothesis tested), never on the data.
//
// The integrals are Boost.Math's regularized incomplete beta functions
// (ibeta) and its ibeta_derivative, in log space; the limits are roots of
// ln M_n(p0) = ln(1/delta) (not an incomplete-beta inverse), rounded
// outward. Pure functions; thread-safe.
#ifndef RISKBOUND_SERVICE_CORE_ANYTIME_H_
#define RISKBOUND_SERVICE_CORE_ANYTIME_H_

#include <array>
#include <cstdint>

#include "absl/status/statusor.h"
#include "service/core/evidence.h"
#include "service/core/numeric.h"
#include "service/core/stop.h"

namespace riskbound::core {

// The sample sizes the mixture's components are tuned for, each with weight
// 1/5 (valid at every size). Fixed in advance; the same for Certify and the
// gate.
inline constexpr std::array<std::uint64_t, 5> kAnytimeTunedSampleCounts = {100, 1000, 10000, 100000,
                                                                           1000000};

// AnytimePriorConcentration
// c of the Beta(c p0, c (1 - p0)) prior for failure probability `delta` and
// tuning size `tuned_sample_count` (see the file comment).
// REQUIRES: 0 < delta < 1, tuned_sample_count >= 1.
double AnytimePriorConcentration(double delta, std::uint64_t tuned_sample_count);

// AnytimeLogMartingaleUpper
// ln M_n(p0) of the upper-limit mixture (prior truncated to p < p0) for k
// errors in n samples. +infinity where the likelihood at p0 is 0 (p0 = 1
// with k < n); NaN only where Boost.Math cannot evaluate a term.
// REQUIRES: k <= n, 0 < p0 <= 1, concentration > 0.
double AnytimeLogMartingaleUpper(std::uint64_t n, std::uint64_t k, double p0, double concentration);

// AnytimeLogMixtureUpper
// ln of the mixture (1/5) sum_j M_n(p0; c_j) over the components of
// kAnytimeTunedSampleCounts at `delta`: the martingale the limits invert.
// REQUIRES: k <= n, 0 < p0 <= 1, 0 < delta < 1.
double AnytimeLogMixtureUpper(std::uint64_t n, std::uint64_t k, double p0, double delta);

// AnytimeUpperLimit
// U_n = sup{p0 : M_n(p0) < 1/delta} for the mixture M_n of
// AnytimeLogMixtureUpper:
// P(true rate > U_n for some n) <= delta. k = n gives 1. Found by a bracket
// grown from k/n, bisection while its rejected end is infinite, then
// Boost.Math's TOMS 748 root finder (Alefeld, Potra & Shi 1995) to a width
// of about 1e-13 relative, reporting the rejected end (outward); a term
// Boost.Math cannot evaluate counts as not rejected, which only widens the
// limit (exact = false then).
// REQUIRES: 1 <= n, k <= n, 0 < delta < 1.
TailLimit AnytimeUpperLimit(std::uint64_t n, std::uint64_t k, double delta);

// AnytimeLowerLimit
// The mirror image (prior truncated to p > p0): 1 - AnytimeUpperLimit(n,
// n - k, delta), by the symmetry p <-> 1 - p of the construction.
// P(true rate < L_n for some n) <= delta. k = 0 gives 0.
// REQUIRES: as AnytimeUpperLimit.
TailLimit AnytimeLowerLimit(std::uint64_t n, std::uint64_t k, double delta);

// HoldoutAnytime
// The holdout-anytime certificate: AnytimeUpperLimit and AnytimeLowerLimit,
// each at delta, on the hold-out counts.
// REQUIRES: counts.sample_count >= 1, error_count <= sample_count,
//           0 < delta < 1.
Certificate HoldoutAnytime(const SampleCounts& counts, double delta);

// AnytimeUpperAtMost
// Whether AnytimeUpperLimit(n, k, delta).value <= epsilon (computed, so a
// plan or a simulation decides exactly as the gate does).
bool AnytimeUpperAtMost(std::uint64_t n, std::uint64_t k, double delta, double epsilon);

// AnytimeLowerAbove
// Whether AnytimeLowerLimit(n, k, delta).value > epsilon, decided the same
// way from the mirrored martingale at 1 - epsilon.
bool AnytimeLowerAbove(std::uint64_t n, std::uint64_t k, double delta, double epsilon);

// AnytimeMaxPassingErrors
// The largest k in [0, n] with AnytimeUpperLimit(n, k, delta) <= epsilon, or
// -1 when none (the limit grows with k, so the passing k are [0, answer]).
// REQUIRES: n >= 1, 0 < delta < 1, 0 < epsilon < 1.
std::int64_t AnytimeMaxPassingErrors(std::uint64_t n, double delta, double epsilon);

// AnytimeMinFailingErrors
// The smallest k in [0, n] with AnytimeLowerLimit(n, k, delta) > epsilon, or
// n + 1 when none.
// REQUIRES: as AnytimeMaxPassingErrors.
std::uint64_t AnytimeMinFailingErrors(std::uint64_t n, double delta, double epsilon);

// PlanAnytime
// The gate's HOLD plan for sequential mode: the smallest total sample count
// n >= max(held, 1) at which the anytime limit at `delta` settles the risk
// test with probability >= pass if the error rate stays at `rate`:
// toward PROMOTE (rate < epsilon) P(Bin(n, rate) <= AnytimeMaxPassingErrors)
// >= pass; toward REJECT P(Bin(n, rate) >= AnytimeMinFailingErrors) >= pass.
// The binomial tails are numeric.h's BinomialTailLowerBound (never above the
// true value). NOT_FOUND when rate == epsilon or no n up to 2^40 does it
// (the search stops there: beyond, each limit costs too much);
// stop.Status() when `stop` stops.
// REQUIRES: 0 <= rate <= 1, 0 < epsilon < 1, 0 < delta < 1, 0 < pass < 1.
absl::StatusOr<std::uint64_t> PlanAnytime(double epsilon, double rate, double delta, double pass,
                                          std::uint64_t held, const StopToken& stop);

}  // namespace riskbound::core

#endif  // RISKBOUND_SERVICE_CORE_ANYTIME_H_
