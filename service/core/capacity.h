// Capacity catalogue: from a description of a model family to its VC
// dimension, with whether the value is exact or an upper bound, a lower bound
// where one is known, and the published source.
//
// Start here when a caller knows the architecture of a classifier (a
// halfspace in R^d, a tree with L leaves, a ReLU net with given layer widths)
// and a training-set bound needs its capacity. Families with infinite VC
// dimension (nearest neighbour, RBF kernels without a margin) are answered,
// not rejected: the answer says which bound families to use instead.
//
// Every formula cites its published source (EstimateCapacity below).
// Everything here is a pure function of its arguments: thread-safe, no
// global state.
#ifndef RISKBOUND_SERVICE_CORE_CAPACITY_H_
#define RISKBOUND_SERVICE_CORE_CAPACITY_H_

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "absl/strings/string_view.h"
#include "service/core/stop.h"

namespace riskbound::core {

// The model families of the catalogue.
enum class ModelKind {
  kHalfspace,            // sign(w.x + b), x in R^d
  kPolynomialThreshold,  // sign(p(x)), p of total degree <= degree in d variables
  kMarginLinear,         // gap-tolerant (large-margin) linear classifiers
  kAxisAlignedBoxes,     // indicator of an axis-aligned box in R^d
  kInterval,             // indicator of one interval on the real line
  kUnionOfIntervals,     // indicator of a union of k intervals
  kDecisionStump,        // one threshold on one of d real features, both polarities
  kDecisionTree,         // binary tree, axis-aligned splits, at most L leaves
  kVotedEnsemble,        // sign(sum_t w_t h_t), T members from a base class
  kThresholdNetwork,     // feed-forward net of linear threshold units
  kReluNetwork,          // feed-forward net of ReLU (piecewise-linear) units
  kSigmoidNetwork,       // feed-forward net of standard sigmoid units
  kFiniteClass,          // a finite class fixed before the sample was seen
  kNearestNeighbour,     // 1-NN / k-NN over all possible stored sets
  kRbfKernelNoMargin,    // RBF-kernel classifiers without a norm/margin constraint
};

// Largest integer parameter accepted (dimension, degree, counts of
// intervals, features, leaves, members, member VC dimension): 2^53 - 1, so
// that d + 1 and 2d are still exact doubles.
inline constexpr std::uint64_t kMaxModelParameter = (1ULL << 53) - 1;

// Network sizes (weight_count, unit_count, layer_count, each layer width and
// the weight count computed from layer_widths) must be below 10^12.
inline constexpr std::uint64_t kMaxNetworkSize = 1000000000000ULL;

// A model family and its size. Only the fields the kind uses may be set; a
// field set for a kind that does not use it is reported as an error rather
// than ignored. Comments give the API field name ("model.<field>") and which
// kinds use it.
struct ModelDescription {
  // model.kind. Required: nullopt (the API's MODEL_KIND_UNSPECIFIED, or a
  // value this server does not know) is refused by EstimateCapacity.
  std::optional<ModelKind> kind;

  // model.dimension: input dimension d >= 1. Required by halfspace,
  // polynomial_threshold, axis_aligned_boxes. Optional for margin_linear
  // (absent = infinite-dimensional feature space, e.g. an RBF kernel),
  // nearest_neighbour and rbf_kernel_no_margin (informational there).
  std::optional<std::uint64_t> dimension;
  // model.with_bias: halfspace and polynomial_threshold only. True (the
  // default when absent) includes the offset b / the constant monomial.
  std::optional<bool> with_bias;
  // model.degree: polynomial_threshold only; total degree p >= 1.
  std::optional<std::uint64_t> degree;
  // model.radius: margin_linear only; R > 0 with ||x|| <= R on the whole
  // support of the input distribution (not only the training sample). For a
  // kernel, R^2 = sup_x K(x, x) (1 for the RBF kernel).
  std::optional<double> radius;
  // model.margin: margin_linear only; the half-width gamma > 0 of the gap
  // (for a canonical SVM, gamma = 1/||w||), fixed before the data was seen.
  std::optional<double> margin;
  // model.interval_count: union_of_intervals only; k >= 1.
  std::optional<std::uint64_t> interval_count;
  // model.feature_count: decision_stump and decision_tree; real-valued
  // features d >= 1.
  std::optional<std::uint64_t> feature_count;
  // model.leaf_count: decision_tree only; at most L >= 1 leaves (L - 1
  // splits), fixed before the data was seen.
  std::optional<std::uint64_t> leaf_count;
  // model.member_count: voted_ensemble only; T >= 1 members, fixed in advance.
  std::optional<std::uint64_t> member_count;
  // model.member_vc_dimension: voted_ensemble only; VC dimension d_B of the
  // base class (0 allowed).
  std::optional<std::uint64_t> member_vc_dimension;
  // model.weight_count: networks; W >= 1 real parameters, thresholds and
  // biases included.
  std::optional<std::uint64_t> weight_count;
  // model.unit_count: networks; computation units (every unit except the
  // inputs, the output unit included), >= 1.
  std::optional<std::uint64_t> unit_count;
  // model.layer_count: networks; depth = number of computation layers (the
  // output layer included), 1 <= layer_count <= unit_count.
  std::optional<std::uint64_t> layer_count;
  // model.layer_widths: networks; fully connected layer widths, input width
  // first, output width (must be 1: one thresholded output) last, each >= 1.
  // When given, weights (with one bias per unit), units and depth are
  // computed from it; counts given beside it must agree.
  std::vector<std::uint64_t> layer_widths;
  // model.hypothesis_count: finite_class; |H| >= 1.
  std::optional<std::uint64_t> hypothesis_count;
  // model.description_bits: finite_class; every hypothesis is named by a
  // codeword of at most b bits of a prefix-free (or fixed-length) code, so
  // |H| <= 2^b by Kraft's inequality. Finite, >= 0. Exactly one of
  // hypothesis_count and description_bits is set.
  std::optional<double> description_bits;
};

enum class CapacityStatus {
  kExact,       // vc_dimension is the VC dimension
  kUpperBound,  // the VC dimension is at most vc_dimension
  kInfinite,    // the VC dimension is infinite; vc_dimension is 0, unused
};

struct CapacityEstimate {
  // The VC dimension or its upper bound: a non-negative integer value, held
  // in a double so that values beyond 2^64 are not wrapped. Values above
  // 2^53 are rounded (upward for upper bounds). 0 when status is kInfinite.
  double vc_dimension = 0.0;
  CapacityStatus status = CapacityStatus::kExact;
  // A proven lower bound on the VC dimension, where one is known (equal to
  // vc_dimension for exact values).
  std::optional<double> vc_dimension_lower_bound;
  // True when the capacity cannot be carried in a uint64: a finite value of
  // at least 2^64, or status kInfinite. Callers must not cast then.
  bool exceeds_uint64 = false;
  // Published source of the formula (and of the lower bound).
  std::string source;
  // The formula with the values substituted.
  std::string formula;
  // Plain-words remarks: validity conditions, from-memory flags, what to use
  // instead.
  std::vector<std::string> notes;
  // finite_class only: ln |H| (natural log), for the Occam families.
  std::optional<double> log_hypothesis_count;
};

// The sizes of a fully connected network, computed from its layer widths.
struct NetworkShape {
  // Weights and biases: sum_i (width_{i-1} + 1) width_i over computation layers.
  std::uint64_t weight_count = 0;
  // Computation units: sum of all widths but the input width.
  std::uint64_t unit_count = 0;
  // Computation layers (the output layer included).
  std::uint64_t layer_count = 0;
  std::uint64_t input_width = 0;
  // W_i of BHLM (2019): weights in layers 1..i, for i = 1..layer_count.
  std::vector<std::uint64_t> cumulative_weights;
  // k_i: units in computation layer i, for i = 1..layer_count.
  std::vector<std::uint64_t> units_per_layer;
};

// ModelKindName
// Returns the lower-case spelling of a kind ("halfspace", "relu_network",
// ...: the API's MODEL_KIND_* value without its prefix), or "unknown" for a
// value outside the enum. For logs and tests; answers use ModelKindTitle.
absl::string_view ModelKindName(ModelKind kind);

// ModelKindTitle
// Returns the kind in words for people ("ReLU network", "decision tree"), as
// answers and error descriptions name it; "unknown" outside the enum.
absl::string_view ModelKindTitle(ModelKind kind);

// CapacityStatusName
// Returns "exact", "upper_bound" or "infinite".
absl::string_view CapacityStatusName(CapacityStatus status);

// NetworkShapeFromLayerWidths
// Returns the weight, unit and layer counts of a fully connected network
// with one bias per computation unit. INVALID_ARGUMENT naming
// "<model_path>.layer_widths" (fewer than two widths: no computation layer)
// or "<model_path>.layer_widths[i]" (a width of 0, a width >= 10^12, an
// output width other than 1), or "<model_path>.layer_widths" when the weight
// count reaches 10^12.
// REQUIRES: nothing; every input is validated. Thread-safe.
absl::StatusOr<NetworkShape> NetworkShapeFromLayerWidths(
    const std::vector<std::uint64_t>& layer_widths, absl::string_view model_path = "model");

// EstimateCapacity
// Returns the VC dimension (or an upper bound, or kInfinite) of the family
// described, with its status, lower bound, source, formula and notes.
// Sources by kind:
//   halfspace: d + 1 with bias, d without; exact (Cover 1965;
//     Shalev-Shwartz & Ben-David 2014, Thms 9.2-9.3).
//   polynomial_threshold: C(d + p, p) (monomials incl. the constant; minus 1
//     without it); exact (Dudley 1978; Wenocur & Dudley 1981; Anthony &
//     Bartlett 1999, Thm 3.5).
//   margin_linear: min(ceil(R^2/gamma^2), d) + 1, or ceil(R^2/gamma^2) + 1
//     without d; upper bound (Vapnik 1995; Burges 1998, gap-tolerant
//     classifiers).
//   axis_aligned_boxes 2d, interval 2, union_of_intervals 2k; exact.
//   decision_stump: largest D with 2d >= C(D, floor(D/2)); exact (Leboeuf,
//     LeBlanc & Marchand 2020).
//   decision_tree: max{m : 2^m <= Cat(L-1) (d(m+1))^(L-1) 2^L}; upper bound,
//     a counting argument derived for this catalogue (cf. Leboeuf, LeBlanc &
//     Marchand 2020).
//   voted_ensemble: T(d_B+1)(3 log2(T(d_B+1)) + 2); upper bound
//     (Shalev-Shwartz & Ben-David 2014, Lemma 10.3).
//   threshold_network: 2 W log2(e N); upper bound (Baum & Haussler 1989).
//   relu_network: L + Lbar W log2(4 e p R log2(2 e p R)), p = 2; upper bound
//     (Bartlett, Harvey, Liaw & Mehrabian 2019, Thm 7, form from memory).
//   sigmoid_network: (W k)^2 + 11 W k log2(18 W k^2); upper bound
//     (Karpinski & Macintyre 1997; Anthony & Bartlett 1999, Thm 8.13, form
//     from memory).
//   finite_class: floor(log2 |H|); upper bound; also ln |H|.
//   nearest_neighbour, rbf_kernel_no_margin: kInfinite (Burges 1998).
// Upper bounds that are not integers are floored (a VC dimension is an
// integer), after a relative nudge of 1e-12 upward against rounding.
// Errors: INVALID_ARGUMENT listing every bad field by its path
// "<model_path>.<field>" (via InvalidFields; model_path is where the model
// sits in the request: "model" for EstimateCapacity, e.g.
// "evidence.training.capacity.model" inside Certify): the kind unset or
// unknown, a required field missing, a field the kind does not use (listed
// together with the kind's other findings), a zero dimension/degree/count, a count above
// kMaxModelParameter, network sizes >= 10^12, zero layers or widths, radius
// or margin not finite and > 0, a result beyond the double range.
// Returns stop.Status() (CANCELLED or DEADLINE_EXCEEDED) instead of an
// estimate when `stop` has stopped.
// REQUIRES: nothing; every input is validated. Thread-safe.
absl::StatusOr<CapacityEstimate> EstimateCapacity(const ModelDescription& model,
                                                  const StopToken& stop = StopToken::Never(),
                                                  absl::string_view model_path = "model");

}  // namespace riskbound::core

#endif  // RISKBOUND_SERVICE_CORE_CAPACITY_H_
