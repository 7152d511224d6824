#include "service/core/effective_vc.h"

#include <algorithm>
#include <cmath>
#include <set>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "service/core/field_violation.h"

namespace riskbound::core {
namespace {

// Deterministic bootstrap draws: splitmix64 (Steele, Lea & Flood 2014).
class SplitMix64 {
 public:
  explicit SplitMix64(std::uint64_t seed) : state_(seed) {}
  std::uint64_t Next() {
    std::uint64_t z = (state_ += 0x9e3779b97f4a7c15ULL);
    z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ULL;
    z = (z ^ (z >> 27)) * 0x94d049bb133111ebULL;
    return z ^ (z >> 31);
  }
  // Uniform in [0, n), n >= 1 (multiply-shift; bias below 2^-32 for n < 2^32).
  std::size_t Below(std::size_t n) {
    return static_cast<std::size_t>((static_cast<unsigned __int128>(Next()) * n) >> 64);
  }

 private:
  std::uint64_t state_;
};

double Sse(const std::vector<double>& n, const std::vector<double>& xi, double h) {
  double s = 0.0;
  for (std::size_t i = 0; i < n.size(); ++i) {
    const double r = xi[i] - VllPhi(n[i] / h);
    s += r * r;
  }
  return s;
}

// The least-squares h over [lo, hi]: the smallest of a log-spaced grid (the
// first on ties, so a flat censored minimum lands at its low end), then a
// golden-section search between the grid neighbours.
double FitH(const std::vector<double>& n, const std::vector<double>& xi, double lo, double hi,
            int grid) {
  const double step = std::log(hi / lo) / (grid - 1);
  int best = 0;
  double best_sse = Sse(n, xi, lo);
  for (int g = 1; g < grid; ++g) {
    const double v = Sse(n, xi, lo * std::exp(step * g));
    if (v < best_sse - 1e-15 * std::max(1.0, best_sse)) {
      best = g;
      best_sse = v;
    }
  }
  double a = lo * std::exp(step * std::max(0, best - 1));
  double b = lo * std::exp(step * std::min(grid - 1, best + 1));
  const double r = (std::sqrt(5.0) - 1.0) / 2.0;
  double c = b - r * (b - a), d = a + r * (b - a);
  double fc = Sse(n, xi, c), fd = Sse(n, xi, d);
  for (int it = 0; it < 200 && (b - a) > 1e-12 * b; ++it) {
    if (fc <= fd) {
      b = d;
      d = c;
      fd = fc;
      c = b - r * (b - a);
      fc = Sse(n, xi, c);
    } else {
      a = c;
      c = d;
      fc = fd;
      d = a + r * (b - a);
      fd = Sse(n, xi, d);
    }
  }
  const double mid = (a + b) / 2.0;
  const double grid_h = lo * std::exp(step * best);
  return Sse(n, xi, mid) <= best_sse ? mid : grid_h;
}

double Mean(const std::vector<double>& v) {
  double s = 0.0;
  for (double x : v) s += x;
  return s / static_cast<double>(v.size());
}

// Percentile by linear interpolation between order statistics (numpy's
// default "linear" method). REQUIRES: sorted, non-empty, q in [0, 1].
double Percentile(const std::vector<double>& sorted, double q) {
  const double pos = q * static_cast<double>(sorted.size() - 1);
  const std::size_t i = static_cast<std::size_t>(std::floor(pos));
  const std::size_t j = std::min(i + 1, sorted.size() - 1);
  return sorted[i] + (pos - static_cast<double>(i)) * (sorted[j] - sorted[i]);
}

absl::Status Validate(const EffectiveVcRequest& r) {
  std::vector<FieldViolation> v;
  if (r.design_points.size() < 2) {
    v.push_back({"design_points",
                 absl::StrCat("give at least 2 design points, got ", r.design_points.size())});
  } else if (r.design_points.size() > kMaxDesignPoints) {
    v.push_back({"design_points", absl::StrCat("at most ", kMaxDesignPoints, " design points, got ",
                                               r.design_points.size())});
    return InvalidFields(v);
  }
  std::set<std::uint64_t> seen;
  std::size_t total = 0;
  std::uint64_t unlisted = 0;  // bad deviations counted but not built
  for (std::size_t i = 0; i < r.design_points.size() && i < kMaxDesignPoints; ++i) {
    const DeviationPoint& p = r.design_points[i];
    const std::string at = absl::StrCat("design_points[", i, "]");
    if (p.half_sample_count == 0) {
      v.push_back({at + ".half_sample_count", "must be at least 1"});
    } else if (p.half_sample_count > (1ULL << 52)) {
      v.push_back({at + ".half_sample_count", "must be at most 2^52"});
    } else if (!seen.insert(p.half_sample_count).second) {
      v.push_back({at + ".half_sample_count",
                   absl::StrCat(p.half_sample_count,
                                " appears twice: give each half-size once, with all its "
                                "repetitions")});
    }
    if (p.deviations.empty()) {
      v.push_back({at + ".deviations", "give at least one measured deviation"});
    }
    total += p.deviations.size();
    for (std::size_t j = 0; j < p.deviations.size() && total <= kMaxDeviationCount; ++j) {
      const double x = p.deviations[j];
      if (std::isfinite(x) && x >= 0.0 && x <= 1.0) continue;
      // Every bad deviation is counted; only those InvalidFields can list
      // are built (a request may hold 100000 of them).
      if (v.size() < kMaxListedViolations) {
        v.push_back({absl::StrCat(at, ".deviations[", j, "]"),
                     "must be a deviation |error rate on half 1 - error rate on half 2| in "
                     "[0, 1]"});
      } else {
        ++unlisted;
      }
    }
  }
  if (total > kMaxDeviationCount) {
    v.push_back({"design_points",
                 absl::StrCat("at most ", kMaxDeviationCount, " deviations in all, got ", total)});
  }
  if (r.training != RelabelTraining::kExact && r.training != RelabelTraining::kApproximate) {
    v.push_back({"training", "required: RELABEL_TRAINING_EXACT or RELABEL_TRAINING_APPROXIMATE"});
  }
  if (r.bootstrap_resample_count > kMaxBootstrapResamples) {
    v.push_back({"bootstrap_resample_count", absl::StrCat("at most ", kMaxBootstrapResamples,
                                                          ", got ", r.bootstrap_resample_count)});
  }
  if (r.interval_level.has_value()) {
    CheckProbabilityOpen("interval_level", *r.interval_level, &v);
  }
  return InvalidFields(v, unlisted);
}

}  // namespace

double VllPhi(double tau) {
  if (tau < 0.5) return 1.0;
  const double l = std::log(2.0 * tau) + 1.0;
  const double t = tau - kVllK;
  return kVllA * l / t * (std::sqrt(1.0 + kVllB * t / l) + 1.0);
}

absl::StatusOr<EffectiveVcFit> FitEffectiveVcDimension(const EffectiveVcRequest& request,
                                                       const StopToken& stop) {
  if (absl::Status s = Validate(request); !s.ok()) return s;
  std::vector<DeviationPoint> points = request.design_points;
  std::sort(points.begin(), points.end(), [](const DeviationPoint& a, const DeviationPoint& b) {
    return a.half_sample_count < b.half_sample_count;
  });
  std::vector<double> n, xi;
  for (const DeviationPoint& p : points) {
    n.push_back(static_cast<double>(p.half_sample_count));
    xi.push_back(Mean(p.deviations));
  }
  // h from n_min / 100 (tau = 100 at the smallest point, far past the
  // design's 30) to 2 n_max (tau = 0.5 at the largest: beyond it Phi = 1 at
  // every point and the fit is censored).
  const double lo = n.front() / 100.0;
  const double hi = 2.0 * n.back();
  EffectiveVcFit fit;
  fit.effective_vc_dimension = FitH(n, xi, lo, hi, 800);
  const double h = fit.effective_vc_dimension;
  double sq = 0.0;
  int informative = 0;
  double min_xi = 1.0;
  for (std::size_t i = 0; i < n.size(); ++i) {
    DeviationFit d;
    d.half_sample_count = points[i].half_sample_count;
    d.mean_deviation = xi[i];
    d.fitted_deviation = VllPhi(n[i] / h);
    d.residual = xi[i] - d.fitted_deviation;
    sq += d.residual * d.residual;
    const double tau = n[i] / h;
    if (tau >= 0.5 && tau <= 30.0) ++informative;
    min_xi = std::min(min_xi, xi[i]);
    fit.points.push_back(d);
  }
  fit.rms_residual = std::sqrt(sq / static_cast<double>(n.size()));
  fit.censored = h >= hi * (1.0 - 1e-9) || min_xi >= 0.95;
  if (fit.censored) fit.effective_vc_dimension = hi;
  fit.poor_fit = fit.rms_residual > kPoorFitRms;
  fit.few_informative_points = informative < 3;
  fit.approximate_training = request.training == RelabelTraining::kApproximate;

  // Bootstrap over the repetitions of each point (sampling noise only).
  fit.bootstrap_resample_count =
      request.bootstrap_resample_count == 0 ? 1000 : request.bootstrap_resample_count;
  fit.interval_level = request.interval_level.value_or(0.95);
  SplitMix64 rng(request.seed);
  std::vector<double> hs;
  hs.reserve(fit.bootstrap_resample_count);
  std::vector<double> resampled(n.size());
  for (std::uint64_t b = 0; b < fit.bootstrap_resample_count; ++b) {
    if (stop.StopRequested()) return stop.Status();
    for (std::size_t i = 0; i < points.size(); ++i) {
      const std::vector<double>& d = points[i].deviations;
      double s = 0.0;
      for (std::size_t j = 0; j < d.size(); ++j) s += d[rng.Below(d.size())];
      resampled[i] = s / static_cast<double>(d.size());
    }
    hs.push_back(FitH(n, resampled, lo, hi, 200));
  }
  std::sort(hs.begin(), hs.end());
  const double tail = (1.0 - fit.interval_level) / 2.0;
  fit.interval_lower = Percentile(hs, tail);
  fit.interval_upper = Percentile(hs, 1.0 - tail);

  fit.notes.push_back(
      "heuristic, not a bound: the Vapnik, Levin & LeCun (1994) curve is an upper-bound shape "
      "used as an equality and calibrated on linear classifiers (exact training on 1-D "
      "thresholds, VC dimension 2, gives about 2.64); never use h_hat in a certificate or a "
      "gate verdict");
  fit.notes.push_back(absl::StrFormat(
      "the %g%% interval is a bootstrap over the repetitions (%d resamples): sampling noise "
      "only, not the error of the curve itself",
      100.0 * fit.interval_level, fit.bootstrap_resample_count));
  if (fit.censored) {
    fit.notes.push_back(absl::StrFormat(
        "censored: the deviations are near 1 at every design point, so the data only say "
        "h >= 2 n_max = %g; add larger half-sizes",
        hi));
  }
  if (fit.poor_fit) {
    fit.notes.push_back(absl::StrFormat(
        "poor fit: root-mean-square residual %.4f exceeds %.2f; the curve does not describe "
        "this learner",
        fit.rms_residual, kPoorFitRms));
  }
  if (fit.few_informative_points) {
    fit.notes.push_back(absl::StrFormat(
        "too few informative points: %d design points have 0.5 <= n / h_hat <= 30 (want at "
        "least 3)",
        informative));
  }
  if (fit.approximate_training) {
    fit.notes.push_back(
        "approximate training: the deviations are underestimated, so h_hat is biased low");
  }
  return fit;
}

}  // namespace riskbound::core
