// Slices: a guarantee on every declared slice of a hold-out set at once.
//
// A platform that counts a model's hold-out errors per slice (region,
// customer segment, input type) can ask for more than an overall bound: "with
// probability >= 1 - delta, no slice's true error exceeds X". Each of the G
// slices gets a one-sided exact binomial (Clopper-Pearson) bound on its own
// counts at a share of the failure probability given to the slices, and the
// shares are chosen so that all G bounds hold at once:
//
//  * Bonferroni (the default): share delta_s = delta / G, or delta * w_s with
//    caller weights whose exact sum is at most 1. By the union bound (Boole's
//    inequality) the probability that some slice's bound fails is at most
//    sum_s delta_s <= delta, whatever the dependence between the slices.
//    Source: Bonferroni (1936).
//  * Sidak: share 1 - (1 - delta)^(1/G) for every slice. When the slices'
//    error counts are independent, the probability that no bound fails is
//    prod_s (1 - P(slice s fails)) >= (1 - share)^G = 1 - delta. The counts
//    are independent binomials given the slice sizes when the hold-out
//    examples were drawn independently and each example's slice is fixed by
//    the example itself (disjoint slices, defined before the data were seen):
//    then, given the sizes n_1..n_G, the examples of each slice are
//    independent draws from that slice's own distribution, independent of
//    the other slices. Bounds valid given the sizes are valid unconditionally.
//    Source: Sidak (1967), JASA 62:626-633.
//
// The slices must be declared before the hold-out set is seen: choosing
// slices after looking at the errors selects the worst (or best) looking
// ones, the same fallacy as choosing a model on its test set.
//
// Pure functions; thread-safe.
#ifndef RISKBOUND_SERVICE_CORE_SLICES_H_
#define RISKBOUND_SERVICE_CORE_SLICES_H_

#include <cstddef>
#include <optional>
#include <string>
#include <vector>

#include "service/core/evidence.h"
#include "service/core/field_violation.h"

namespace riskbound::core {

// API: SliceShareRule.
enum class SliceShareRule {
  kBonferroni = 1,
  kSidak = 2,
};

// One slice's weight in a weighted union bound. API: SliceWeight.
struct SliceWeight {
  std::string slice_name;
  double weight = 0.0;
};

// How the slices share their failure probability. API: SliceSharing; paths
// <prefix>.rule, <prefix>.weights[i].{slice_name, weight}.
struct SliceSharing {
  // nullopt: a rule this server does not know (refused). The API's unset
  // value is kBonferroni.
  std::optional<SliceShareRule> rule = SliceShareRule::kBonferroni;
  // kBonferroni only: one weight per slice, by name. Empty: equal shares.
  std::vector<SliceWeight> weights;
};

// SliceShareRuleName
// "bonferroni" or "sidak", as the CLI spells them.
const char* SliceShareRuleName(SliceShareRule rule);

// CheckSlices
// Appends a violation for every bad slice of `slices`, with paths
// "<prefix>[i].name" (empty, longer than kMaxSliceNameBytes, a control
// character, or a name used twice), "<prefix>[i].sample_count" and
// "<prefix>[i].error_count" (as CheckSampleCounts), and "<prefix>" for more
// than kMaxSlices entries. Returns true when it appended none.
bool CheckSlices(const std::vector<SliceEvidence>& slices, const std::string& prefix,
                 std::vector<FieldViolation>* out);

// CheckSliceSharing
// Appends a violation for every bad field of `sharing` for these slices:
// "<prefix>.rule" (unknown), "<prefix>.weights" (weights with the Sidak
// rule, weights that do not name every slice once, or whose exact sum
// exceeds 1), "<prefix>.weights[i].slice_name" (not a slice, or named
// twice), "<prefix>.weights[i].weight" (not in (0, 1]). Returns true when
// it appended none.
bool CheckSliceSharing(const SliceSharing& sharing, const std::vector<SliceEvidence>& slices,
                       const std::string& prefix, std::vector<FieldViolation>* out);

// SidakShare
// The largest double found <= 1 - (1 - total)^(1/g): the value from
// -expm1(log1p(-total) / g), lowered by a relative 1e-9 (far more than the
// few units in the last place that computation can be off). REQUIRES:
// 0 < total < 1, g >= 1.
double SidakShare(double total, std::size_t g);

// SliceShares
// Each slice's share of `total`, in the order of `slices`: EqualShare(total,
// G), WeightedShare(total, w_s) or SidakShare(total, G). REQUIRES:
// CheckSliceSharing passed, slices non-empty.
std::vector<double> SliceShares(const SliceSharing& sharing,
                                const std::vector<SliceEvidence>& slices, double total);

// SlicesSpent
// What `shares` spend together, rounded up: their exact sum (Bonferroni);
// for kSidak, 1 - prod_s(1 - shares_s) rounded up (and never reported above
// the exact sum, nor above `total`, which SidakShare's shares cannot exceed).
double SlicesSpent(SliceShareRule rule, const std::vector<double>& shares, double total);

// SliceShareRuleText
// The rule in plain words with its source and, for Sidak, its condition.
std::string SliceShareRuleText(SliceShareRule rule, bool weighted);

// SliceCautions
// The cautions an answer with slices carries on top of the usual ones.
const std::vector<std::string>& SliceCautions();

// One slice's certificate. API: SliceCertificate.
struct SliceCertificate {
  std::string slice_name;
  Certificate certificate;
};

// API: SliceSummary.
struct SliceSummary {
  // Worst first: largest risk_upper_bound first, ties by name.
  std::vector<SliceCertificate> slice_certificates;
  SliceShareRule rule = SliceShareRule::kBonferroni;
  // The failure probability given to the slices, and what they spend.
  double failure_probability = 0.0;
  double spent_failure_probability = 0.0;
  // The largest slice upper bound and its slice.
  double worst_slice_upper_bound = 0.0;
  std::string worst_slice_name;
  // The worst-slice statement in plain words.
  std::string statement;
};

// CertifySlices
// A hold-out exact binomial certificate per slice at its share of `total`,
// sorted worst first, and the worst-slice statement. REQUIRES: CheckSlices
// and CheckSliceSharing passed, slices non-empty, 0 < total < 1.
SliceSummary CertifySlices(const std::vector<SliceEvidence>& slices,
                           const SliceSharing& sharing, double total);

}  // namespace riskbound::core

#endif  // RISKBOUND_SERVICE_CORE_SLICES_H_
