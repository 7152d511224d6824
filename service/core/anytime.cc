#include "service/core/anytime.h"

#include <algorithm>
#include <array>
#include <cmath>
#include <functional>
#include <limits>

#include "absl/status/status.h"
#include "boost/math/policies/policy.hpp"
#include "boost/math/special_functions/beta.hpp"
#include "boost/math/special_functions/gamma.hpp"
#include "boost/math/tools/toms748_solve.hpp"

namespace riskbound::core {
namespace {

// Errors come back as NaN or infinity (handled by the callers), never as an
// exception. Evaluated in double, not promoted to long double (Boost's
// default): about three times faster, and the log-martingale below is summed
// in double anyway, so its rounding (about 1e-16 of terms in the thousands
// of nats) stays larger than the special functions' own in double.
using Quiet = boost::math::policies::policy<
    boost::math::policies::domain_error<boost::math::policies::ignore_error>,
    boost::math::policies::pole_error<boost::math::policies::ignore_error>,
    boost::math::policies::overflow_error<boost::math::policies::ignore_error>,
    boost::math::policies::underflow_error<boost::math::policies::ignore_error>,
    boost::math::policies::evaluation_error<boost::math::policies::ignore_error>,
    boost::math::policies::promote_double<false>>;

constexpr double kInf = std::numeric_limits<double>::infinity();
// The plan's search stops here: beyond, one limit takes milliseconds.
constexpr std::uint64_t kMaxPlanSampleCount = std::uint64_t{1} << 40;

// ln B(a, b) from Boost.Math's lgamma.
double LogBeta(double a, double b) {
  return boost::math::lgamma(a, Quiet()) + boost::math::lgamma(b, Quiet()) -
         boost::math::lgamma(a + b, Quiet());
}

}  // namespace

double AnytimePriorConcentration(double delta, std::uint64_t tuned_sample_count) {
  // Howard, Ramdas, McAuliffe & Sekhon (2021): the normal mixture with
  // precision rho is tightest at intrinsic time m for
  // rho = m / (2 ln(1/alpha) + ln(1 + 2 ln(1/alpha))) (from memory; the
  // tightness it buys is measured in tests/soundness/REPORT.md).
  const double l = -std::log(delta);
  return static_cast<double>(tuned_sample_count) / (2.0 * l + std::log1p(2.0 * l));
}

double AnytimeLogMartingaleUpper(std::uint64_t n, std::uint64_t k, double p0,
                                 double concentration) {
  if (p0 >= 1.0) return k < n ? kInf : 0.0;
  const double a = concentration * p0;
  const double b = concentration * (1.0 - p0);
  if (!(a > 0.0) || !(b > 0.0)) return std::numeric_limits<double>::quiet_NaN();
  const double alpha = a + static_cast<double>(k);
  const double beta = b + static_cast<double>(n - k);
  // B(alpha, beta) / (p0^k (1 - p0)^(n - k)) = p0^(a-1) (1 - p0)^(b-1) /
  // ibeta_derivative(alpha, beta, p0): no cancellation of two huge logs.
  const double density = boost::math::ibeta_derivative(alpha, beta, p0, Quiet());
  if (density == 0.0) return kInf;  // p0 far in the tail of the posterior
  const double posterior_mass = boost::math::ibeta(alpha, beta, p0, Quiet());
  const double prior_mass = boost::math::ibeta(a, b, p0, Quiet());
  const double log_m = std::log(posterior_mass) + (a - 1.0) * std::log(p0) +
                       (b - 1.0) * std::log1p(-p0) - std::log(density) - LogBeta(a, b) -
                       std::log(prior_mass);
  return log_m;
}

double AnytimeLogMixtureUpper(std::uint64_t n, std::uint64_t k, double p0, double delta) {
  std::array<double, kAnytimeTunedSampleCounts.size()> terms;
  double top = -kInf;
  for (std::size_t j = 0; j < terms.size(); ++j) {
    terms[j] = AnytimeLogMartingaleUpper(
        n, k, p0, AnytimePriorConcentration(delta, kAnytimeTunedSampleCounts[j]));
    if (std::isnan(terms[j])) return terms[j];
    top = std::max(top, terms[j]);
  }
  if (std::isinf(top)) return top;
  double sum = 0.0;
  for (double t : terms) sum += std::exp(t - top);
  return top + std::log(sum / static_cast<double>(terms.size()));
}

TailLimit AnytimeUpperLimit(std::uint64_t n, std::uint64_t k, double delta) {
  TailLimit out;
  if (k >= n) {
    out.value = 1.0;
    return out;
  }
  const double threshold = -std::log(delta);
  // f(p0) = ln M_n(p0) - ln(1/delta): < 0 not rejected, >= 0 rejected. A term
  // Boost.Math cannot evaluate counts as not rejected (only widens the limit).
  const auto f = [&](double p0) {
    const double log_m = AnytimeLogMixtureUpper(n, k, p0, delta);
    if (std::isnan(log_m)) {
      out.exact = false;
      return -1.0;
    }
    return log_m - threshold;
  };
  // M_n(k/n) <= 1 < 1/delta (k/n maximizes the likelihood): not rejected.
  const double nd = static_cast<double>(n);
  double lo = static_cast<double>(k) / nd;
  double hi = 1.0;  // rejected: the likelihood at 1 is 0 (k < n)
  double f_hi = kInf;
  // ln M_n(k/n) <= 0, so f(k/n) <= -ln(1/delta): the right sign for the root
  // finder (at k = 0, p0 = 0 itself cannot be evaluated).
  double f_lo = -threshold;
  // Bracket: steps growing from about one standard deviation above k/n, so
  // the bracket is narrow from the start.
  double step = std::sqrt(std::max(lo, 1.0 / nd) / nd) + 1.0 / nd;
  while (lo + step < 1.0) {
    const double x = lo + step;
    const double fx = f(x);
    if (fx >= 0.0) {
      hi = x;
      f_hi = fx;
      break;
    }
    lo = x;
    f_lo = fx;
    step *= 2.0;
  }
  // Bisect while the rejected end is infinite (a density that underflows).
  for (int i = 0; i < 200 && !std::isfinite(f_hi) && hi - lo > 1e-13 * hi; ++i) {
    const double mid = lo + (hi - lo) / 2.0;
    if (mid <= lo || mid >= hi) break;
    const double fm = f(mid);
    if (fm >= 0.0) {
      hi = mid;
      f_hi = fm;
    } else {
      lo = mid;
      f_lo = fm;
    }
  }
  if (std::isfinite(f_hi) && hi - lo > 1e-13 * hi) {
    // Alefeld, Potra & Shi's TOMS 748 bracketing root finder (Boost.Math):
    // keeps a bracket [a, b] with f(a) < 0 <= f(b); b is the rejected end,
    // reported (outward).
    std::uintmax_t iterations = 200;
    const auto bracket = boost::math::tools::toms748_solve(
        f, lo, hi, f_lo, f_hi, boost::math::tools::eps_tolerance<double>(44), iterations, Quiet());
    hi = bracket.second;
  }
  out.value = hi;
  return out;
}

TailLimit AnytimeLowerLimit(std::uint64_t n, std::uint64_t k, double delta) {
  TailLimit upper = AnytimeUpperLimit(n, n - k, delta);
  // 1 - hi is exact in binary when hi >= 1/2, and rounds to nearest otherwise;
  // step one ulp down so the limit stays outward.
  const double value = k == 0 ? 0.0 : std::nextafter(1.0 - upper.value, 0.0);
  return TailLimit{std::max(0.0, value), upper.exact};
}

Certificate HoldoutAnytime(const SampleCounts& counts, double delta) {
  const TailLimit upper = AnytimeUpperLimit(counts.sample_count, counts.error_count, delta);
  const TailLimit lower = AnytimeLowerLimit(counts.sample_count, counts.error_count, delta);
  Certificate c = MakeCertificate(Family::kHoldoutAnytime, delta, EmpiricalRate(counts),
                                  upper.value, lower.value);
  c.exact = upper.exact && lower.exact;
  c.notes.emplace_back(
      "anytime-valid: holds simultaneously for every hold-out size, so the hold-out set may "
      "grow and the certificate be recomputed any number of times at this failure "
      "probability (beta-binomial mixture, its prior tuned for 100 to 1,000,000 samples)");
  if (!c.exact) {
    c.notes.emplace_back(
        "a term of the mixture could not be evaluated at this sample size; the limits were "
        "widened where it failed");
  }
  return c;
}

bool AnytimeUpperAtMost(std::uint64_t n, std::uint64_t k, double delta, double epsilon) {
  if (k >= n) return epsilon >= 1.0;
  const double rate = static_cast<double>(k) / static_cast<double>(n);
  if (epsilon < rate) return false;  // U >= k/n
  // ln M_n(p0) increases with p0 above k/n (checked on a grid in
  // tests/core/anytime_test.cc), so the limit is at most epsilon iff epsilon
  // is rejected. Decided from the one value where it is clearly on one side
  // of the threshold; the limit itself is computed only in between.
  const double threshold = -std::log(delta);
  const double log_m = AnytimeLogMixtureUpper(n, k, epsilon, delta);
  if (!std::isnan(log_m)) {
    const double margin = 1e-9 * (1.0 + threshold);
    if (log_m >= threshold + margin) return true;
    if (log_m < threshold - margin) return false;
  }
  return AnytimeUpperLimit(n, k, delta).value <= epsilon;
}

bool AnytimeLowerAbove(std::uint64_t n, std::uint64_t k, double delta, double epsilon) {
  if (k == 0) return false;
  if (epsilon >= static_cast<double>(k) / static_cast<double>(n)) return false;  // L <= k/n
  // L = 1 - U(n, n - k) (one ulp down): L > epsilon iff the mirrored limit
  // is below 1 - epsilon, i.e. 1 - epsilon is rejected with room to spare.
  const double threshold = -std::log(delta);
  const double log_m = AnytimeLogMixtureUpper(n, n - k, 1.0 - epsilon, delta);
  if (!std::isnan(log_m)) {
    const double margin = 1e-9 * (1.0 + threshold);
    if (log_m >= threshold + margin) return true;
    if (log_m < threshold - margin) return false;
  }
  return AnytimeLowerLimit(n, k, delta).value > epsilon;
}

std::int64_t AnytimeMaxPassingErrors(std::uint64_t n, double delta, double epsilon) {
  if (!AnytimeUpperAtMost(n, 0, delta, epsilon)) return -1;
  // U >= k/n, so every k > epsilon n fails.
  const std::uint64_t hi = std::min<std::uint64_t>(
      n, static_cast<std::uint64_t>(std::floor(epsilon * static_cast<double>(n))) + 1);
  absl::StatusOr<std::uint64_t> first_fail = SmallestSatisfying(
      1, hi, [&](std::uint64_t k) { return !AnytimeUpperAtMost(n, k, delta, epsilon); });
  if (!first_fail.ok()) return static_cast<std::int64_t>(hi);
  return static_cast<std::int64_t>(*first_fail) - 1;
}

std::uint64_t AnytimeMinFailingErrors(std::uint64_t n, double delta, double epsilon) {
  // L <= k/n, so every k <= epsilon n keeps L <= epsilon... up to rounding:
  // start one below.
  const double floor_k = std::floor(epsilon * static_cast<double>(n));
  const std::uint64_t lo = floor_k >= 1.0 ? static_cast<std::uint64_t>(floor_k) - 1 : 0;
  absl::StatusOr<std::uint64_t> k = SmallestSatisfying(
      std::min(lo, n), n, [&](std::uint64_t j) { return AnytimeLowerAbove(n, j, delta, epsilon); });
  return k.ok() ? *k : n + 1;
}

absl::StatusOr<std::uint64_t> PlanAnytime(double epsilon, double rate, double delta, double pass,
                                          std::uint64_t held, const StopToken& stop) {
  if (rate == epsilon) {
    return absl::NotFoundError("the error rate equals the threshold");
  }
  const bool toward_promote = rate < epsilon;
  bool stopped = false;
  const std::function<bool(std::uint64_t)> ok = [&](std::uint64_t n) {
    if (stopped || stop.StopRequested()) {
      stopped = true;
      return true;
    }
    if (toward_promote) {
      const std::int64_t k_max = AnytimeMaxPassingErrors(n, delta, epsilon);
      return k_max >= 0 && BinomialTailLowerBound(n, static_cast<std::uint64_t>(k_max), rate,
                                                  BinomialTail::kAtMost) >= pass;
    }
    const std::uint64_t k_min = AnytimeMinFailingErrors(n, delta, epsilon);
    return k_min <= n && BinomialTailLowerBound(n, k_min, rate, BinomialTail::kAtLeast) >= pass;
  };
  const std::uint64_t lo = std::max<std::uint64_t>(held, 1);
  if (lo > kMaxPlanSampleCount) return absl::NotFoundError("beyond 2^40 samples");
  absl::StatusOr<std::uint64_t> n = SmallestSatisfying(lo, kMaxPlanSampleCount, ok, lo);
  if (stopped) return stop.Status();
  if (!n.ok()) return absl::NotFoundError("no sample size up to 2^40 settles it");
  return n;
}

}  // namespace riskbound::core
