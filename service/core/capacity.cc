#include "service/core/capacity.h"

#include <algorithm>
#include <bit>
#include <cfloat>
#include <cmath>
#include <limits>
#include <numbers>
#include <string>
#include <utility>
#include <vector>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "absl/strings/str_join.h"
#include "service/core/field_violation.h"
#include "service/core/numeric.h"

namespace riskbound::core {
namespace {

using u128 = unsigned __int128;

constexpr double kTwoTo53 = 9007199254740992.0;
constexpr double kTwoTo64 = 18446744073709551616.0;
// Relative nudge applied before flooring a real-valued upper bound, so that a
// rounding error in the last bits can never move the floor down.
constexpr double kUpwardNudge = 1e-12;
constexpr double kLn2 = std::numbers::ln2;
constexpr double kE = std::numbers::e;

std::string Num(double x) { return absl::StrFormat("%.10g", x); }

// ---------------------------------------------------------------------------
// Results.

void SetExact(double value, CapacityEstimate* out) {
  out->status = CapacityStatus::kExact;
  out->vc_dimension = value;
  out->vc_dimension_lower_bound = value;
}

// A real-valued upper bound on an integer quantity: floored after an upward
// nudge. Beyond 2^53 every double is an integer and the nudged value stands.
double FloorUpper(double x) {
  const double y = x * (1.0 + kUpwardNudge);
  return y < kTwoTo53 ? std::floor(y) : y;
}

void SetUpperBound(double value, CapacityEstimate* out) {
  out->status = CapacityStatus::kUpperBound;
  out->vc_dimension = value;
}

// Fills exceeds_uint64 and the rounding note once the value is final.
void Finish(CapacityEstimate* out) {
  if (out->status == CapacityStatus::kInfinite) {
    out->vc_dimension = 0.0;
    out->exceeds_uint64 = true;
    return;
  }
  out->exceeds_uint64 = out->vc_dimension >= kTwoTo64;
  if (out->vc_dimension > kTwoTo53) {
    out->notes.push_back(
        out->status == CapacityStatus::kExact
            ? "the value exceeds 2^53 and is carried as a double, rounded upward "
              "(relative error below 1e-10)"
            : "the value exceeds 2^53 and is carried as a double, rounded upward");
  }
  if (out->exceeds_uint64) {
    out->notes.push_back(
        "the capacity does not fit in a 64-bit integer; any VC bound with it is vacuous "
        "for every sample size the service accepts");
  }
}

// ---------------------------------------------------------------------------
// Log binomial coefficients that never come out too small.

// Upper bound on ln C(n, k) for 0 <= k <= n: an exact sum of logs for
// min(k, n-k) <= 1000 (nudged up by its rounding), else Robbins' (1955)
// Stirling bounds, 1/(12j+1) < ln j! - ln(sqrt(2 pi j)(j/e)^j) < 1/(12j),
// which overestimate ln C by less than 1/(12k) + 1/(12(n-k)).
double LogChooseUpper(double n, double k) {
  k = std::min(k, n - k);
  if (k <= 0.0) return 0.0;
  if (k <= 1000.0) {
    double s = 0.0;
    for (double i = 1.0; i <= k; i += 1.0) s += std::log((n - k + i) / i);
    return s * (1.0 + kUpwardNudge) + 1e-12;
  }
  const double nk = n - k;
  const double entropy = k * std::log(n / k) - nk * std::log1p(-k / n);
  const double value = entropy + 0.5 * std::log(n / (2.0 * std::numbers::pi * k * nk)) +
                       1.0 / (12.0 * n) - 1.0 / (12.0 * k + 1.0) - 1.0 / (12.0 * nk + 1.0);
  return value + 1e-12 * std::abs(value) + 1e-12;
}

// Exact C(n, k) when it is below 2^64, else nullopt. k <= n.
std::optional<std::uint64_t> ExactChoose(std::uint64_t n, std::uint64_t k) {
  k = std::min(k, n - k);
  u128 c = 1;
  for (std::uint64_t i = 1; i <= k; ++i) {
    // c = C(n - k + i - 1, i - 1) < 2^64 and n < 2^55: the product fits.
    c = c * static_cast<u128>(n - k + i) / i;
    if (c > std::numeric_limits<std::uint64_t>::max()) return std::nullopt;
  }
  return static_cast<std::uint64_t>(c);
}

// ---------------------------------------------------------------------------
// Field checks.

constexpr ModelKind kAllKinds[] = {
    ModelKind::kHalfspace,         ModelKind::kPolynomialThreshold,
    ModelKind::kMarginLinear,      ModelKind::kAxisAlignedBoxes,
    ModelKind::kInterval,          ModelKind::kUnionOfIntervals,
    ModelKind::kDecisionStump,     ModelKind::kDecisionTree,
    ModelKind::kVotedEnsemble,     ModelKind::kThresholdNetwork,
    ModelKind::kReluNetwork,       ModelKind::kSigmoidNetwork,
    ModelKind::kFiniteClass,       ModelKind::kNearestNeighbour,
    ModelKind::kRbfKernelNoMargin,
};

constexpr absl::string_view kAllFields[] = {
    "dimension",      "with_bias",    "degree",          "radius",
    "margin",         "interval_count", "feature_count", "leaf_count",
    "member_count",   "member_vc_dimension", "weight_count", "unit_count",
    "layer_count",    "layer_widths", "hypothesis_count", "description_bits"};

bool IsSet(const ModelDescription& m, absl::string_view f) {
  if (f == "dimension") return m.dimension.has_value();
  if (f == "with_bias") return m.with_bias.has_value();
  if (f == "degree") return m.degree.has_value();
  if (f == "radius") return m.radius.has_value();
  if (f == "margin") return m.margin.has_value();
  if (f == "interval_count") return m.interval_count.has_value();
  if (f == "feature_count") return m.feature_count.has_value();
  if (f == "leaf_count") return m.leaf_count.has_value();
  if (f == "member_count") return m.member_count.has_value();
  if (f == "member_vc_dimension") return m.member_vc_dimension.has_value();
  if (f == "weight_count") return m.weight_count.has_value();
  if (f == "unit_count") return m.unit_count.has_value();
  if (f == "layer_count") return m.layer_count.has_value();
  if (f == "layer_widths") return !m.layer_widths.empty();
  if (f == "hypothesis_count") return m.hypothesis_count.has_value();
  if (f == "description_bits") return m.description_bits.has_value();
  return false;
}

std::vector<absl::string_view> UsedFields(ModelKind kind) {
  switch (kind) {
    case ModelKind::kHalfspace: return {"dimension", "with_bias"};
    case ModelKind::kPolynomialThreshold: return {"dimension", "degree", "with_bias"};
    case ModelKind::kMarginLinear: return {"radius", "margin", "dimension"};
    case ModelKind::kAxisAlignedBoxes: return {"dimension"};
    case ModelKind::kInterval: return {};
    case ModelKind::kUnionOfIntervals: return {"interval_count"};
    case ModelKind::kDecisionStump: return {"feature_count"};
    case ModelKind::kDecisionTree: return {"leaf_count", "feature_count"};
    case ModelKind::kVotedEnsemble: return {"member_count", "member_vc_dimension"};
    case ModelKind::kThresholdNetwork:
    case ModelKind::kReluNetwork:
    case ModelKind::kSigmoidNetwork:
      return {"weight_count", "unit_count", "layer_count", "layer_widths"};
    case ModelKind::kFiniteClass: return {"hypothesis_count", "description_bits"};
    case ModelKind::kNearestNeighbour:
    case ModelKind::kRbfKernelNoMargin: return {"dimension"};
  }
  return {};
}

// "required for this model kind (ReLU network)".
std::string RequiredFor(ModelKind kind) {
  return absl::StrCat("required for this model kind (", ModelKindTitle(kind), ")");
}

// "<model_path>.<field>": the field's path in the request ("model.degree",
// "evidence.training.capacity.model.degree").
std::string Path(absl::string_view model_path, absl::string_view field) {
  return absl::StrCat(model_path, ".", field);
}

// A count that must be present (when `required`) and lie in [min, max].
// Returns the value when present and valid.
std::optional<std::uint64_t> CheckCount(absl::string_view model_path, absl::string_view field,
                                        const std::optional<std::uint64_t>& value, bool required,
                                        std::uint64_t min, std::uint64_t max, ModelKind kind,
                                        std::vector<FieldViolation>* out) {
  if (!value.has_value()) {
    if (required) {
      out->push_back({Path(model_path, field), RequiredFor(kind)});
    }
    return std::nullopt;
  }
  if (*value < min) {
    out->push_back({Path(model_path, field), absl::StrCat("must be >= ", min, ", got ", *value)});
    return std::nullopt;
  }
  if (*value > max) {
    out->push_back({Path(model_path, field),
                    max == kMaxNetworkSize - 1
                        ? absl::StrCat("must be below 10^12, got ", *value)
                        : absl::StrCat("must be at most 2^53 - 1 (", max, "), got ", *value)});
    return std::nullopt;
  }
  return value;
}

std::optional<double> CheckPositive(absl::string_view model_path, absl::string_view field,
                                    const std::optional<double>& value, bool required,
                                    ModelKind kind, std::vector<FieldViolation>* out) {
  if (!value.has_value()) {
    if (required) {
      out->push_back({Path(model_path, field), RequiredFor(kind)});
    }
    return std::nullopt;
  }
  if (!std::isfinite(*value) || *value <= 0.0) {
    out->push_back(
        {Path(model_path, field), absl::StrCat("must be a finite number > 0, got ",
                                               std::isnan(*value) ? "NaN" : Num(*value))});
    return std::nullopt;
  }
  return value;
}

// ---------------------------------------------------------------------------
// Families.

absl::StatusOr<CapacityEstimate> Halfspace(const ModelDescription& m,
                                           absl::string_view model_path) {
  std::vector<FieldViolation> v;
  const auto d =
      CheckCount(model_path, "dimension", m.dimension, true, 1, kMaxModelParameter, *m.kind, &v);
  if (absl::Status s = InvalidFields(v); !s.ok()) return s;
  CapacityEstimate e;
  const bool bias = m.with_bias.value_or(true);
  const double dd = static_cast<double>(*d);
  SetExact(bias ? dd + 1.0 : dd, &e);
  e.source = bias ? "Cover (1965); Shalev-Shwartz & Ben-David (2014) Thm 9.3 (from memory); "
                    "Burges (1998): oriented hyperplanes in R^n have VC dimension n + 1"
                  : "Cover (1965); Shalev-Shwartz & Ben-David (2014) Thm 9.2 (from memory)";
  e.formula = bias ? absl::StrCat("h = d + 1 with d = ", *d) : absl::StrCat("h = d with d = ", *d);
  if (!m.with_bias.has_value()) e.notes.push_back("with_bias not set: bias assumed (d + 1)");
  return e;
}

absl::StatusOr<CapacityEstimate> Polynomial(const ModelDescription& m,
                                            absl::string_view model_path) {
  std::vector<FieldViolation> v;
  const auto d =
      CheckCount(model_path, "dimension", m.dimension, true, 1, kMaxModelParameter, *m.kind, &v);
  const auto p =
      CheckCount(model_path, "degree", m.degree, true, 1, kMaxModelParameter, *m.kind, &v);
  if (absl::Status s = InvalidFields(v); !s.ok()) return s;
  const bool bias = m.with_bias.value_or(true);
  const std::uint64_t n = *d + *p;
  const std::uint64_t k = std::min(*d, *p);
  double value = 0.0;
  CapacityEstimate e;
  if (std::optional<std::uint64_t> c = ExactChoose(n, k)) {
    // Exact integer; the double conversion rounds only beyond 2^53, and then
    // upward, so a VC bound using it is never too small.
    const std::uint64_t exact = bias ? *c : *c - 1;
    value = static_cast<double>(exact);
    if (value < kTwoTo64 && static_cast<std::uint64_t>(value) < exact) {
      value = std::nextafter(value, HUGE_VAL);
    }
  } else {
    // C(n, k) >= 2^64. C(n, k) >= 2^k for n >= 2k, so k > 1100 is beyond the
    // double range; otherwise sum the k logarithms.
    double log_c = std::numeric_limits<double>::infinity();
    if (k <= 1100) {
      log_c = 0.0;
      for (std::uint64_t i = 1; i <= k; ++i) {
        log_c += std::log(static_cast<double>(n - k + i) / static_cast<double>(i));
      }
    }
    if (!(log_c < std::log(DBL_MAX) - 1e-6)) {
      return InvalidFields({{Path(model_path, "degree"),
                             absl::StrCat("the VC dimension C(d + p, p) with d = ", *d, ", p = ",
                                          *p, " exceeds the double range (about 1.8e308)")}});
    }
    value = std::exp(log_c) * (1.0 + 1e-10);
  }
  SetExact(value, &e);
  e.source =
      "Dudley (1978); Wenocur & Dudley (1981): an N-dimensional vector space of functions "
      "has VC dimension N (monomials are linearly independent, so N is attained); "
      "Anthony & Bartlett (1999) Thm 3.5 (from memory)";
  e.formula = bias ? absl::StrCat("h = C(d + p, p) with d = ", *d, ", p = ", *p)
                   : absl::StrCat("h = C(d + p, p) - 1 with d = ", *d, ", p = ", *p,
                                  " (no constant monomial)");
  e.notes.push_back(
      "counts all monomials of total degree <= p; a homogeneous kernel (x.y)^p uses only "
      "degree exactly p: dimension C(d + p - 1, p) (Burges 1998)");
  return e;
}

absl::StatusOr<CapacityEstimate> MarginLinear(const ModelDescription& m,
                                              absl::string_view model_path) {
  std::vector<FieldViolation> v;
  const auto r = CheckPositive(model_path, "radius", m.radius, true, *m.kind, &v);
  const auto g = CheckPositive(model_path, "margin", m.margin, true, *m.kind, &v);
  const auto d =
      CheckCount(model_path, "dimension", m.dimension, false, 1, kMaxModelParameter, *m.kind, &v);
  if (absl::Status s = InvalidFields(v); !s.ok()) return s;
  // Long double keeps the ceiling right unless R^2/gamma^2 is within about
  // 1e-19 (relative) of an integer, where it is then that integer.
  const long double ratio_ld = (static_cast<long double>(*r) / static_cast<long double>(*g)) *
                               (static_cast<long double>(*r) / static_cast<long double>(*g));
  long double cap = std::ceil(ratio_ld);
  if (d.has_value()) cap = std::min(cap, static_cast<long double>(*d));
  const long double h = cap + 1.0L;
  if (!(h <= static_cast<long double>(DBL_MAX))) {
    return InvalidFields({{Path(model_path, "margin"),
                           absl::StrCat("radius/margin ratio too large: ceil(R^2/gamma^2) + 1 "
                                        "exceeds the double range (R = ",
                                        Num(*r), ", gamma = ", Num(*g), ")")}});
  }
  CapacityEstimate e;
  // Above 2^53 the conversion may round down by < 1 ulp: step one ulp up.
  double value = static_cast<double>(h);
  if (static_cast<long double>(value) < h) value = std::nextafter(value, HUGE_VAL);
  SetUpperBound(value, &e);
  e.source =
      "Vapnik (1995), Delta-margin hyperplanes; Burges (1998), gap-tolerant classifiers "
      "(Theorem 6, from memory)";
  e.formula = d.has_value()
                  ? absl::StrCat("h <= min(ceil(R^2/gamma^2), d) + 1 with R = ", Num(*r),
                                 ", gamma = ", Num(*g), ", d = ", *d)
                  : absl::StrCat("h <= ceil(R^2/gamma^2) + 1 with R = ", Num(*r),
                                 ", gamma = ", Num(*g), " (infinite-dimensional feature space)");
  e.notes.push_back(
      "R must bound ||x|| on the whole support of the input distribution (e.g. by "
      "normalization); the radius of the training sample is not rigorous. For a kernel, "
      "R^2 = sup_x K(x, x) (1 for the RBF kernel)");
  e.notes.push_back(
      "the margin must be fixed before the data is seen; plugging in the margin a trained "
      "SVM achieved is not rigorous: use SRM over a grid of margins, or prefer the "
      "Rademacher margin bound");
  e.notes.push_back(
      "convention: R is a radius and gamma the half-width of the gap (canonical SVM: gamma "
      "= 1/||w||); Burges' diameter D and full width M give the same ratio D^2/M^2");
  e.notes.push_back(
      "the class abstains inside the gap: count training points inside the margin as "
      "errors when applying this capacity to an SVM");
  if (!d.has_value()) {
    e.notes.push_back("dimension not given: the feature space is treated as infinite-"
                      "dimensional, so only the radius/margin term limits the capacity");
  }
  return e;
}

absl::StatusOr<CapacityEstimate> Boxes(const ModelDescription& m, absl::string_view model_path) {
  std::vector<FieldViolation> v;
  const auto d =
      CheckCount(model_path, "dimension", m.dimension, true, 1, kMaxModelParameter, *m.kind, &v);
  if (absl::Status s = InvalidFields(v); !s.ok()) return s;
  CapacityEstimate e;
  SetExact(2.0 * static_cast<double>(*d), &e);
  e.source = "Shalev-Shwartz & Ben-David (2014) Ch. 6 (axis-aligned rectangles)";
  e.formula = absl::StrCat("h = 2d with d = ", *d);
  return e;
}

absl::StatusOr<CapacityEstimate> Interval(const ModelDescription&, absl::string_view) {
  CapacityEstimate e;
  SetExact(2.0, &e);
  e.source = "standard (Shalev-Shwartz & Ben-David 2014 Ch. 6): one interval shatters 2 "
             "points, never the middle-negative labeling of 3";
  e.formula = "h = 2";
  return e;
}

absl::StatusOr<CapacityEstimate> UnionOfIntervals(const ModelDescription& m,
                                                  absl::string_view model_path) {
  std::vector<FieldViolation> v;
  const auto k = CheckCount(model_path, "interval_count", m.interval_count, true, 1,
                            kMaxModelParameter, *m.kind, &v);
  if (absl::Status s = InvalidFields(v); !s.ok()) return s;
  CapacityEstimate e;
  SetExact(2.0 * static_cast<double>(*k), &e);
  e.source = "standard: k intervals realize every labeling of 2k points (at most k runs of "
             "positives), never the alternating labeling of 2k + 1 points";
  e.formula = absl::StrCat("h = 2k with k = ", *k);
  return e;
}

absl::StatusOr<CapacityEstimate> Stump(const ModelDescription& m, absl::string_view model_path) {
  std::vector<FieldViolation> v;
  const auto l = CheckCount(model_path, "feature_count", m.feature_count, true, 1,
                            kMaxModelParameter, *m.kind, &v);
  if (absl::Status s = InvalidFields(v); !s.ok()) return s;
  const u128 two_l = static_cast<u128>(2) * *l;
  // Largest D with C(D, floor(D/2)) <= 2l; the central coefficient at D = 60
  // is 1.2e17 > 2^55 > 2l, so the loop ends well inside u128.
  std::uint64_t big_d = 1;
  while (true) {
    const std::uint64_t next = big_d + 1;
    u128 c = 1;
    const std::uint64_t half = next / 2;
    for (std::uint64_t i = 1; i <= half; ++i) c = c * (next - half + i) / i;
    if (c > two_l) break;
    big_d = next;
  }
  CapacityEstimate e;
  SetExact(static_cast<double>(big_d), &e);
  e.source = "Leboeuf, LeBlanc & Marchand (2020), decision stumps with both polarities";
  e.formula = absl::StrCat("h = largest D with 2l >= C(D, floor(D/2)), l = ", *l);
  e.notes.push_back("stumps threshold one real feature and may predict either label on "
                    "either side; features with ties only lose labelings");
  return e;
}

absl::StatusOr<CapacityEstimate> Tree(const ModelDescription& m, absl::string_view model_path) {
  std::vector<FieldViolation> v;
  const auto leaves =
      CheckCount(model_path, "leaf_count", m.leaf_count, true, 1, kMaxModelParameter, *m.kind, &v);
  const auto d = CheckCount(model_path, "feature_count", m.feature_count, true, 1,
                            kMaxModelParameter, *m.kind, &v);
  if (absl::Status s = InvalidFields(v); !s.ok()) return s;
  const double L = static_cast<double>(*leaves);
  const double splits = L - 1.0;
  // log2 Catalan(L - 1) = log2 C(2n, n) - log2(n + 1), never too small.
  const double log2_cat =
      (LogChooseUpper(2.0 * splits, splits) - std::log(splits + 1.0)) / kLn2;
  const double log2_d = std::log2(static_cast<double>(*d));
  // 2^m <= Cat(L-1) (d (m+1))^(L-1) 2^L, in log2, with a tolerance that can
  // only admit a larger m (the conservative side).
  auto holds = [&](std::uint64_t mm) {
    const double md = static_cast<double>(mm);
    const double rhs = log2_cat + splits * (log2_d + std::log2(md + 1.0)) + L;
    return md <= rhs + 1e-9 * (1.0 + md);
  };
  // The set where it holds is an interval [0, m*] (m - (L-1) log2(m+1) is
  // convex); m = 2^62 is outside it for every admitted L, d.
  absl::StatusOr<std::uint64_t> first_fail =
      SmallestSatisfying(1, 1ULL << 62, [&](std::uint64_t mm) { return !holds(mm); });
  if (!first_fail.ok()) return absl::InternalError("tree counting bound: no bracket");
  CapacityEstimate e;
  SetUpperBound(static_cast<double>(*first_fail - 1), &e);
  e.vc_dimension_lower_bound = L;
  e.source =
      "a counting argument (derived for this catalogue): on m points a tree with at most L "
      "leaves realizes at most Cat(L-1) shapes x (d (m+1))^(L-1) (feature, threshold) "
      "choices x 2^L leaf labelings, and shattering needs 2^m; cf. Leboeuf, LeBlanc & "
      "Marchand (2020), O(N log(N l)) for a fixed structure. Lower bound L: splits on one "
      "feature realize every labeling of L points";
  e.formula = absl::StrCat("h <= max{m : 2^m <= Cat(L-1) (d(m+1))^(L-1) 2^L}, L = ", *leaves,
                           ", d = ", *d);
  e.notes.push_back("covers every tree with at most L leaves; L must be fixed before the "
                    "data is seen (or use SRM over L)");
  e.notes.push_back("for trees the Occam bound with a description length (finite_class "
                    "with description_bits) is usually much tighter");
  return e;
}

absl::StatusOr<CapacityEstimate> Voted(const ModelDescription& m, absl::string_view model_path) {
  std::vector<FieldViolation> v;
  const auto t = CheckCount(model_path, "member_count", m.member_count, true, 1, kMaxModelParameter,
                            *m.kind, &v);
  const auto db = CheckCount(model_path, "member_vc_dimension", m.member_vc_dimension, true, 0,
                             kMaxModelParameter, *m.kind, &v);
  if (absl::Status s = InvalidFields(v); !s.ok()) return s;
  const double tt = static_cast<double>(std::max<std::uint64_t>(*t, 3));
  const double dd = static_cast<double>(std::max<std::uint64_t>(*db, 3));
  const double n = tt * (dd + 1.0);
  const double value = n * (3.0 * std::log2(n) + 2.0);
  CapacityEstimate e;
  SetUpperBound(FloorUpper(value), &e);
  e.vc_dimension_lower_bound =
      static_cast<double>(*db);  // one member with weight 1 is a base hypothesis
  e.source = "Shalev-Shwartz & Ben-David (2014) Lemma 10.3; lower bound d_B: a vote with "
             "one nonzero weight is a base hypothesis";
  e.formula = absl::StrCat("h <= T(d_B+1)(3 log2(T(d_B+1)) + 2) with T = ", Num(tt),
                           ", d_B = ", Num(dd), " (= ", Num(value), ")");
  e.notes.push_back("evaluated with log2: the book's log base is not verified and log2 "
                    "gives the larger, safe value");
  if (*t < 3 || *db < 3) {
    e.notes.push_back(absl::StrCat(
        "the lemma is stated for T, d_B >= 3; T = ", *t, ", d_B = ", *db,
        " were raised to 3. Still an upper bound (derived here): zero weights make a vote "
        "of T members a vote of 3, and the proof uses the base class only through its "
        "growth function, sum_{i<=d_B} C(m, i) <= sum_{i<=3} C(m, i) <= (em/3)^3"));
  }
  e.notes.push_back("T must be fixed in advance (or use SRM over T); margin bounds for "
                    "voting (Schapire, Freund, Bartlett & Lee 1998) avoid the dependence on T");
  return e;
}

// Network sizes from layer_widths or from the counts.
struct NetSizes {
  double weights = 0;
  double units = 0;
  std::optional<double> layers;
  std::optional<NetworkShape> shape;
};

absl::StatusOr<NetSizes> NetworkSizes(const ModelDescription& m, absl::string_view model_path,
                                      bool need_layers) {
  std::vector<FieldViolation> v;
  NetSizes out;
  if (!m.layer_widths.empty()) {
    absl::StatusOr<NetworkShape> shape = NetworkShapeFromLayerWidths(m.layer_widths, model_path);
    if (!shape.ok()) return shape.status();
    auto agree = [&](absl::string_view field, const std::optional<std::uint64_t>& given,
                     std::uint64_t computed) {
      if (given.has_value() && *given != computed) {
        v.push_back({Path(model_path, field), absl::StrCat("does not match layer_widths (computed ",
                                                           computed, ", got ", *given, ")")});
      }
    };
    agree("weight_count", m.weight_count, shape->weight_count);
    agree("unit_count", m.unit_count, shape->unit_count);
    agree("layer_count", m.layer_count, shape->layer_count);
    if (absl::Status s = InvalidFields(v); !s.ok()) return s;
    out.weights = static_cast<double>(shape->weight_count);
    out.units = static_cast<double>(shape->unit_count);
    out.layers = static_cast<double>(shape->layer_count);
    out.shape = *std::move(shape);
    return out;
  }
  const auto w = CheckCount(model_path, "weight_count", m.weight_count, true, 1,
                            kMaxNetworkSize - 1, *m.kind, &v);
  const auto u =
      CheckCount(model_path, "unit_count", m.unit_count, true, 1, kMaxNetworkSize - 1, *m.kind, &v);
  const auto l = CheckCount(model_path, "layer_count", m.layer_count, need_layers, 1,
                            kMaxNetworkSize - 1, *m.kind, &v);
  if (l.has_value() && u.has_value() && *l > *u) {
    v.push_back({Path(model_path, "layer_count"),
                 absl::StrCat("must be at most unit_count (every layer has a unit), got ", *l,
                              " layers for ", *u, " units")});
  }
  if (!m.weight_count && !m.unit_count && !m.layer_count) {
    v.push_back({Path(model_path, "layer_widths"),
                 "give layer_widths, or weight_count and unit_count (and layer_count)"});
  }
  if (absl::Status s = InvalidFields(v); !s.ok()) return s;
  out.weights = static_cast<double>(*w);
  out.units = static_cast<double>(*u);
  if (l.has_value()) out.layers = static_cast<double>(*l);
  return out;
}

// Lower bound from the halfspace embedding: one path through the network
// computes any halfspace of the input (later units pass it through).
void HalfspaceLowerBound(const NetSizes& s, CapacityEstimate* e) {
  if (!s.shape.has_value()) return;
  e->vc_dimension_lower_bound = static_cast<double>(s.shape->input_width) + 1.0;
  e->notes.push_back(absl::StrCat(
      "lower bound d_0 + 1 = ", s.shape->input_width + 1,
      ": the network contains every halfspace of its input (one unit computes it, the "
      "following units pass it on)"));
}

absl::StatusOr<CapacityEstimate> ThresholdNet(const ModelDescription& m,
                                              absl::string_view model_path) {
  absl::StatusOr<NetSizes> s = NetworkSizes(m, model_path, false);
  if (!s.ok()) return s.status();
  const double value = 2.0 * s->weights * std::log2(kE * s->units);
  CapacityEstimate e;
  SetUpperBound(FloorUpper(value), &e);
  e.source = "Baum & Haussler (1989)";
  e.formula = absl::StrCat("h <= 2 W log2(e N) with W = ", Num(s->weights), ", N = ",
                           Num(s->units), " (= ", Num(value), ")");
  HalfspaceLowerBound(*s, &e);
  e.notes.push_back("the known lower bound Omega(W log W) (Maass 1994) has no stated "
                    "constant, so no numeric value is derived from it");
  if (m.layer_widths.empty() && m.layer_count.has_value()) {
    e.notes.push_back("layer_count is not used by this bound");
  }
  return e;
}

absl::StatusOr<CapacityEstimate> ReluNet(const ModelDescription& m, absl::string_view model_path) {
  absl::StatusOr<NetSizes> s = NetworkSizes(m, model_path, true);
  if (!s.ok()) return s.status();
  constexpr double kPieces = 2.0;
  const double w = s->weights;
  const double layers = *s->layers;
  double lbar = layers;
  double r = layers * s->units;
  if (s->shape.has_value()) {
    double sum_wi = 0.0;
    r = 0.0;
    for (std::size_t i = 0; i < s->shape->units_per_layer.size(); ++i) {
      sum_wi += static_cast<double>(s->shape->cumulative_weights[i]);
      // k_i (1 + (i-1) deg^(i-1)) with deg = 1 and i 1-based.
      r += static_cast<double>(s->shape->units_per_layer[i]) * static_cast<double>(i + 1);
    }
    lbar = sum_wi / w;
  }
  const double inner = 2.0 * kE * kPieces * r;
  const double value = layers + lbar * w * std::log2(2.0 * inner * std::log2(inner));
  CapacityEstimate e;
  SetUpperBound(FloorUpper(value), &e);
  e.source = "Bartlett, Harvey, Liaw & Mehrabian (2019) JMLR 20(63), Thm 7 (explicit form "
             "from memory); asymptotics O(W L log W) checked against the abstract";
  e.formula = absl::StrCat("h <= L + Lbar W log2(4 e p R log2(2 e p R)) with W = ", Num(w),
                           ", L = ", Num(layers), ", Lbar = ", Num(lbar), ", R = ", Num(r),
                           ", p = 2 (= ", Num(value), ")");
  e.notes.push_back("explicit constant of Bartlett, Harvey, Liaw & Mehrabian (2019), "
                    "Theorem 7, recalled from memory: verify before relying on it; p = 2 "
                    "pieces for ReLU, conservative if the paper counts breakpoints");
  if (!s->shape.has_value()) {
    e.notes.push_back("layer widths not given: Lbar <= L and R = sum_i i k_i <= L U were "
                      "used; the bound increases in both, so it stays an upper bound");
  }
  HalfspaceLowerBound(*s, &e);
  e.notes.push_back("BHLM's lower bound c W L log2(W/L) (Thm 3) has an unstated constant "
                    "c, so no numeric value is derived from it");
  return e;
}

absl::StatusOr<CapacityEstimate> SigmoidNet(const ModelDescription& m,
                                            absl::string_view model_path) {
  absl::StatusOr<NetSizes> s = NetworkSizes(m, model_path, false);
  if (!s.ok()) return s.status();
  const double w = s->weights;
  const double k = s->units;
  const double value = (w * k) * (w * k) + 11.0 * w * k * std::log2(18.0 * w * k * k);
  CapacityEstimate e;
  SetUpperBound(FloorUpper(value), &e);
  e.source = "Karpinski & Macintyre (1997), O(W^2 k^2); explicit form Anthony & Bartlett "
             "(1999) Thm 8.13 (from memory)";
  e.formula = absl::StrCat("h <= (W k)^2 + 11 W k log2(18 W k^2) with W = ", Num(w),
                           ", k = ", Num(k), " (= ", Num(value), ")");
  e.notes.push_back("explicit constants of Anthony & Bartlett (1999), Theorem 8.13, "
                    "recalled from memory: verify before relying on them");
  HalfspaceLowerBound(*s, &e);
  e.notes.push_back("the lower bound Omega(W^2) (Koiran & Sontag 1997) has no stated "
                    "constant, so no numeric value is derived from it");
  if (m.layer_widths.empty() && m.layer_count.has_value()) {
    e.notes.push_back("layer_count is not used by this bound");
  }
  return e;
}

absl::StatusOr<CapacityEstimate> Finite(const ModelDescription& m, absl::string_view model_path) {
  std::vector<FieldViolation> v;
  if (m.hypothesis_count.has_value() == m.description_bits.has_value()) {
    v.push_back({Path(model_path, "hypothesis_count"),
                 "set exactly one of hypothesis_count and description_bits"});
    return InvalidFields(v);
  }
  CapacityEstimate e;
  if (m.hypothesis_count.has_value()) {
    const std::uint64_t n = *m.hypothesis_count;
    if (n < 1) {
      return InvalidFields({{Path(model_path, "hypothesis_count"), "must be >= 1, got 0"}});
    }
    SetUpperBound(static_cast<double>(std::bit_width(n) - 1), &e);
    e.log_hypothesis_count = std::log(static_cast<double>(n));
    e.formula = absl::StrCat("h <= floor(log2 |H|) with |H| = ", n);
  } else {
    const double b = *m.description_bits;
    if (!std::isfinite(b) || b < 0.0) {
      return InvalidFields(
          {{Path(model_path, "description_bits"),
            absl::StrCat("must be a finite number >= 0, got ", std::isnan(b) ? "NaN" : Num(b))}});
    }
    SetUpperBound(std::floor(b), &e);
    e.log_hypothesis_count = b * kLn2;
    e.formula = absl::StrCat("h <= floor(b) with |H| <= 2^b, b = ", Num(b));
    e.notes.push_back("|H| <= 2^b holds for a prefix-free or fixed-length code of at most "
                      "b bits (Kraft's inequality)");
  }
  e.source = "shattering h points needs 2^h distinct hypotheses, so h <= log2 |H| "
             "(Shalev-Shwartz & Ben-David 2014 Ch. 6)";
  e.notes.push_back("use log_hypothesis_count with the Occam families (Blumer, "
                    "Ehrenfeucht, Haussler & Warmuth 1987; Langford 2005), which are "
                    "tighter than a VC bound at this capacity; the class must be fixed "
                    "before the training sample is seen");
  return e;
}

absl::StatusOr<CapacityEstimate> Infinite(const ModelDescription& m, absl::string_view model_path) {
  std::vector<FieldViolation> v;
  CheckCount(model_path, "dimension", m.dimension, false, 1, kMaxModelParameter, *m.kind, &v);
  if (absl::Status s = InvalidFields(v); !s.ok()) return s;
  CapacityEstimate e;
  e.status = CapacityStatus::kInfinite;
  if (m.kind == ModelKind::kNearestNeighbour) {
    e.source = "a direct argument: a nearest-neighbour rule (Cover & Hart 1967) storing "
               "any set of distinct points with arbitrary labels realizes every labeling "
               "of them";
    e.formula = "h = infinity (nearest-neighbour rules over all stored sets)";
    e.notes.push_back(
        "no VC bound applies; use a hold-out bound (always valid, the default for gating), "
        "or sample compression (e.g. condensed nearest neighbour with a fixed number of "
        "stored prototypes)");
  } else {
    e.source = "Burges (1998): RBF-kernel classifiers without a norm constraint shatter "
               "any finite set of distinct points";
    e.formula = "h = infinity (infinite-dimensional feature map, no margin)";
    e.notes.push_back(
        "no VC bound applies; use a hold-out bound (always valid), sample compression "
        "with the support vectors, or a margin bound: the Rademacher margin bound with "
        "the weight norm, or kind margin_linear with radius 1 (sup K(x, x) for the RBF "
        "kernel) and a margin fixed in advance");
  }
  return e;
}

}  // namespace

absl::string_view ModelKindName(ModelKind kind) {
  switch (kind) {
    case ModelKind::kHalfspace: return "halfspace";
    case ModelKind::kPolynomialThreshold: return "polynomial_threshold";
    case ModelKind::kMarginLinear: return "margin_linear";
    case ModelKind::kAxisAlignedBoxes: return "axis_aligned_boxes";
    case ModelKind::kInterval: return "interval";
    case ModelKind::kUnionOfIntervals: return "union_of_intervals";
    case ModelKind::kDecisionStump: return "decision_stump";
    case ModelKind::kDecisionTree: return "decision_tree";
    case ModelKind::kVotedEnsemble: return "voted_ensemble";
    case ModelKind::kThresholdNetwork: return "threshold_network";
    case ModelKind::kReluNetwork: return "relu_network";
    case ModelKind::kSigmoidNetwork: return "sigmoid_network";
    case ModelKind::kFiniteClass: return "finite_class";
    case ModelKind::kNearestNeighbour: return "nearest_neighbour";
    case ModelKind::kRbfKernelNoMargin: return "rbf_kernel_no_margin";
  }
  return "unknown";
}

absl::string_view ModelKindTitle(ModelKind kind) {
  switch (kind) {
    case ModelKind::kHalfspace:
      return "halfspace";
    case ModelKind::kPolynomialThreshold:
      return "polynomial threshold classifier";
    case ModelKind::kMarginLinear:
      return "large-margin linear classifier";
    case ModelKind::kAxisAlignedBoxes:
      return "axis-aligned box";
    case ModelKind::kInterval:
      return "interval";
    case ModelKind::kUnionOfIntervals:
      return "union of intervals";
    case ModelKind::kDecisionStump:
      return "decision stump";
    case ModelKind::kDecisionTree:
      return "decision tree";
    case ModelKind::kVotedEnsemble:
      return "voted ensemble";
    case ModelKind::kThresholdNetwork:
      return "threshold network";
    case ModelKind::kReluNetwork:
      return "ReLU network";
    case ModelKind::kSigmoidNetwork:
      return "sigmoid network";
    case ModelKind::kFiniteClass:
      return "finite class";
    case ModelKind::kNearestNeighbour:
      return "nearest-neighbour rule";
    case ModelKind::kRbfKernelNoMargin:
      return "RBF-kernel classifier without a margin";
  }
  return "unknown";
}

absl::string_view CapacityStatusName(CapacityStatus status) {
  switch (status) {
    case CapacityStatus::kExact: return "exact";
    case CapacityStatus::kUpperBound: return "upper_bound";
    case CapacityStatus::kInfinite: return "infinite";
  }
  return "unknown";
}

absl::StatusOr<NetworkShape> NetworkShapeFromLayerWidths(const std::vector<std::uint64_t>& widths,
                                                         absl::string_view model_path) {
  const std::string path = Path(model_path, "layer_widths");
  std::vector<FieldViolation> v;
  if (widths.size() < 2) {
    return InvalidFields({{path, absl::StrCat("needs the input width and at least one computation "
                                              "layer, got ",
                                              widths.size(), " width(s)")}});
  }
  for (std::size_t i = 0; i < widths.size(); ++i) {
    const std::string field = absl::StrCat(path, "[", i, "]");
    if (widths[i] == 0) {
      v.push_back({field, "must be >= 1, got 0"});
    } else if (widths[i] >= kMaxNetworkSize) {
      v.push_back({field, absl::StrCat("must be below 10^12, got ", widths[i])});
    }
  }
  const std::size_t last = widths.size() - 1;
  if (widths[last] != 1 && widths[last] != 0) {
    v.push_back({absl::StrCat(path, "[", last, "]"),
                 absl::StrCat("the output width must be 1 (one thresholded output for a "
                              "binary classifier), got ",
                              widths[last])});
  }
  if (absl::Status s = InvalidFields(v); !s.ok()) return s;
  NetworkShape shape;
  shape.input_width = widths[0];
  shape.layer_count = last;
  u128 weights = 0;
  u128 units = 0;
  for (std::size_t i = 1; i < widths.size(); ++i) {
    // Each factor < 10^12: the product < 10^24 fits; stop summing at 10^12.
    weights += static_cast<u128>(widths[i - 1] + 1) * widths[i];
    units += widths[i];
    if (weights >= kMaxNetworkSize || units >= kMaxNetworkSize) {
      return InvalidFields({{path, absl::StrCat("the network has at least 10^12 ",
                                                weights >= kMaxNetworkSize ? "weights" : "units",
                                                " (counted up to computation layer ", i,
                                                "); the supported size is below 10^12")}});
    }
    shape.cumulative_weights.push_back(static_cast<std::uint64_t>(weights));
    shape.units_per_layer.push_back(widths[i]);
  }
  shape.weight_count = static_cast<std::uint64_t>(weights);
  shape.unit_count = static_cast<std::uint64_t>(units);
  return shape;
}

absl::StatusOr<CapacityEstimate> EstimateCapacity(const ModelDescription& model,
                                                  const StopToken& stop,
                                                  absl::string_view model_path) {
  if (stop.StopRequested()) return stop.Status();
  if (!model.kind.has_value() || ModelKindName(*model.kind) == "unknown") {
    std::vector<std::string> kinds;
    for (ModelKind k : kAllKinds) kinds.push_back(std::string(ModelKindTitle(k)));
    return InvalidFields(
        {{Path(model_path, "kind"),
          absl::StrCat("required: the model family, one of ", absl::StrJoin(kinds, ", "),
                       " (unset, or a value this server does not know)")}});
  }
  const ModelKind kind = *model.kind;
  // Fields the kind does not use are reported, never silently ignored, and
  // together with what the kind's own checks find.
  std::vector<FieldViolation> unused;
  const std::vector<absl::string_view> used = UsedFields(kind);
  for (absl::string_view f : kAllFields) {
    if (IsSet(model, f) && std::find(used.begin(), used.end(), f) == used.end()) {
      std::string why = absl::StrCat("is not used by this model kind (", ModelKindTitle(kind),
                                     "); leave it unset");
      if (kind == ModelKind::kRbfKernelNoMargin && f == "margin") {
        absl::StrAppend(&why,
                        " (with a margin fixed in advance use the large-margin linear kind, "
                        "radius 1 for the RBF kernel)");
      }
      unused.push_back({Path(model_path, f), std::move(why)});
    }
  }

  absl::StatusOr<CapacityEstimate> e;
  switch (kind) {
    case ModelKind::kHalfspace:
      e = Halfspace(model, model_path);
      break;
    case ModelKind::kPolynomialThreshold:
      e = Polynomial(model, model_path);
      break;
    case ModelKind::kMarginLinear:
      e = MarginLinear(model, model_path);
      break;
    case ModelKind::kAxisAlignedBoxes:
      e = Boxes(model, model_path);
      break;
    case ModelKind::kInterval:
      e = Interval(model, model_path);
      break;
    case ModelKind::kUnionOfIntervals:
      e = UnionOfIntervals(model, model_path);
      break;
    case ModelKind::kDecisionStump:
      e = Stump(model, model_path);
      break;
    case ModelKind::kDecisionTree:
      e = Tree(model, model_path);
      break;
    case ModelKind::kVotedEnsemble:
      e = Voted(model, model_path);
      break;
    case ModelKind::kThresholdNetwork:
      e = ThresholdNet(model, model_path);
      break;
    case ModelKind::kReluNetwork:
      e = ReluNet(model, model_path);
      break;
    case ModelKind::kSigmoidNetwork:
      e = SigmoidNet(model, model_path);
      break;
    case ModelKind::kFiniteClass:
      e = Finite(model, model_path);
      break;
    case ModelKind::kNearestNeighbour:
    case ModelKind::kRbfKernelNoMargin:
      e = Infinite(model, model_path);
      break;
  }
  if (!unused.empty()) {
    // Every bad field at once: the unused ones, then what the kind found.
    const ViolationReport found = ViolationReportOf(e.status());
    unused.insert(unused.end(), found.listed.begin(), found.listed.end());
    return InvalidFields(unused, found.unlisted_count);
  }
  if (!e.ok()) return e;
  if (!std::isfinite(e->vc_dimension) || e->vc_dimension < 0.0) {
    return InvalidFields(
        {{std::string(model_path), "the capacity of this model exceeds the double range"}});
  }
  Finish(&*e);
  // Every kind costs a bounded amount (at most a few thousand steps, or one
  // pass over layer_widths); a stop that came meanwhile still wins.
  if (stop.StopRequested()) return stop.Status();
  return e;
}

}  // namespace riskbound::core
