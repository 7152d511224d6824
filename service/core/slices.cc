#include "service/core/slices.h"

#include <algorithm>
#include <cmath>
#include <map>
#include <set>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "service/core/certify.h"
#include "service/core/delta_split.h"
#include "service/core/holdout.h"
#include "service/core/limits.h"

namespace riskbound::core {
namespace {

bool HasControlCharacter(const std::string& s) {
  return std::any_of(s.begin(), s.end(), [](char c) {
    const auto u = static_cast<unsigned char>(c);
    return u < 0x20 || u == 0x7f;
  });
}

}  // namespace

const char* SliceShareRuleName(SliceShareRule rule) {
  return rule == SliceShareRule::kSidak ? "sidak" : "bonferroni";
}

bool CheckSlices(const std::vector<SliceEvidence>& slices, const std::string& prefix,
                 std::vector<FieldViolation>* out) {
  const std::size_t before = out->size();
  if (!CheckListSize(prefix, slices.size(), kMaxSlices, out)) return false;
  std::set<std::string> seen;
  for (std::size_t i = 0; i < slices.size(); ++i) {
    const SliceEvidence& s = slices[i];
    const std::string p = absl::StrCat(prefix, "[", i, "]");
    if (s.name.empty()) {
      out->push_back({p + ".name", "must name the slice"});
    } else if (!CheckTextSize(p + ".name", s.name, kMaxSliceNameBytes, out)) {
    } else if (HasControlCharacter(s.name)) {
      out->push_back({p + ".name", "must not contain control characters"});
    } else if (!seen.insert(s.name).second) {
      out->push_back({p + ".name", absl::StrCat("slice '", s.name, "' is given twice")});
    }
    CheckSampleCounts(p, s, out);
  }
  return out->size() == before;
}

bool CheckSliceSharing(const SliceSharing& sharing, const std::vector<SliceEvidence>& slices,
                       const std::string& prefix, std::vector<FieldViolation>* out) {
  const std::size_t before = out->size();
  if (!sharing.rule.has_value()) {
    out->push_back({prefix + ".rule",
                    "unknown share rule (SLICE_SHARE_RULE_BONFERRONI or SLICE_SHARE_RULE_SIDAK)"});
  }
  if (sharing.weights.empty()) return out->size() == before;
  if (!CheckListSize(prefix + ".weights", sharing.weights.size(), kMaxSlices, out)) return false;
  if (sharing.rule == SliceShareRule::kSidak) {
    out->push_back({prefix + ".weights",
                    "weights go with the Bonferroni rule; the Sidak rule gives every slice the "
                    "same share"});
    return false;
  }
  std::set<std::string> names;
  for (const SliceEvidence& s : slices) names.insert(s.name);
  std::set<std::string> named;
  std::vector<double> usable;
  bool each_ok = true;
  for (std::size_t i = 0; i < sharing.weights.size(); ++i) {
    const SliceWeight& w = sharing.weights[i];
    const std::string p = absl::StrCat(prefix, ".weights[", i, "]");
    if (names.count(w.slice_name) == 0) {
      out->push_back({p + ".slice_name", absl::StrCat("'", w.slice_name,
                                                      "' is not a slice of the evidence")});
      each_ok = false;
    } else if (!named.insert(w.slice_name).second) {
      out->push_back({p + ".slice_name", absl::StrCat("slice '", w.slice_name,
                                                      "' has a weight already")});
      each_ok = false;
    }
    if (!std::isfinite(w.weight) || w.weight <= 0.0 || w.weight > 1.0) {
      out->push_back({p + ".weight", "must be a weight in (0, 1]"});
      each_ok = false;
    } else {
      usable.push_back(w.weight);
    }
  }
  if (each_ok && named.size() != names.size()) {
    out->push_back({prefix + ".weights",
                    absl::StrCat("give one weight per slice: ", names.size(), " slices, ",
                                 named.size(), " weighted")});
    each_ok = false;
  }
  // Exactly, not in rounded double arithmetic (delta_split.h).
  if (!WeightsSumAtMostOne(usable)) {
    out->push_back({prefix + ".weights", WeightSumMessage(usable, each_ok ? "weights" : "")});
  }
  return out->size() == before;
}

double SidakShare(double total, std::size_t g) {
  if (g == 1) return total;
  const double exact_ish = -std::expm1(std::log1p(-total) / static_cast<double>(g));
  // The computed value is within a few units in the last place (about 1e-15
  // relative) of 1 - (1 - total)^(1/g); 1e-9 below it is surely below.
  return exact_ish * (1.0 - 1e-9);
}

std::vector<double> SliceShares(const SliceSharing& sharing,
                                const std::vector<SliceEvidence>& slices, double total) {
  const std::size_t g = slices.size();
  std::vector<double> shares(g);
  if (sharing.rule == SliceShareRule::kSidak) {
    std::fill(shares.begin(), shares.end(), SidakShare(total, g));
    return shares;
  }
  if (sharing.weights.empty()) {
    std::fill(shares.begin(), shares.end(), EqualShare(total, g));
    return shares;
  }
  std::map<std::string, double> weight;
  for (const SliceWeight& w : sharing.weights) weight[w.slice_name] = w.weight;
  for (std::size_t i = 0; i < g; ++i) shares[i] = WeightedShare(total, weight[slices[i].name]);
  return shares;
}

double SlicesSpent(SliceShareRule rule, const std::vector<double>& shares, double total) {
  const double sum = SpentOf(shares);
  if (rule != SliceShareRule::kSidak) return sum;
  // 1 - prod(1 - s) = -expm1(sum log1p(-s)), computed to a few units in the
  // last place and raised by a relative 1e-12 to stay above the exact value.
  double log_keep = 0.0;
  for (double s : shares) log_keep += std::log1p(-s);
  const double up = -std::expm1(log_keep) * (1.0 + 1e-12);
  // Each share is below SidakShare's exact value, so the exact product
  // spends at most `total`: every one of the three is an upper bound.
  return std::min({up, sum, total});
}

std::string SliceShareRuleText(SliceShareRule rule, bool weighted) {
  if (rule == SliceShareRule::kSidak) {
    return "Sidak shares 1 - (1 - delta)^(1/G) (Sidak 1967), valid because the slices' error "
           "counts are independent given the slice sizes: hold-out examples drawn "
           "independently, each example's slice fixed by the example itself";
  }
  return weighted ? "union bound with the caller's weights, delta * w_s (Bonferroni 1936), "
                    "valid whatever the dependence between the slices"
                  : "union bound, delta / G each (Bonferroni 1936), valid whatever the "
                    "dependence between the slices";
}

const std::vector<std::string>& SliceCautions() {
  static const std::vector<std::string>* const kCautions = new std::vector<std::string>{
      "Slice bounds hold for the slices as declared, only if they were fixed before the "
      "hold-out set was seen and are disjoint; they are not a fairness audit: other "
      "metrics, other groups, and shift between slices are not covered.",
  };
  return *kCautions;
}

SliceSummary CertifySlices(const std::vector<SliceEvidence>& slices,
                           const SliceSharing& sharing, double total) {
  SliceSummary out;
  out.rule = sharing.rule.value_or(SliceShareRule::kBonferroni);
  out.failure_probability = total;
  const std::vector<double> shares = SliceShares(sharing, slices, total);
  for (std::size_t i = 0; i < slices.size(); ++i) {
    Certificate c = HoldoutExactBinomial(slices[i], shares[i]);
    c.notes.push_back(absl::StrCat("slice '", slices[i].name, "': ", slices[i].error_count,
                                   " errors in ", slices[i].sample_count,
                                   " hold-out samples, at its share of the slices' failure "
                                   "probability"));
    out.slice_certificates.push_back({slices[i].name, std::move(c)});
  }
  std::sort(out.slice_certificates.begin(), out.slice_certificates.end(),
            [](const SliceCertificate& a, const SliceCertificate& b) {
              if (a.certificate.risk_upper_bound != b.certificate.risk_upper_bound) {
                return a.certificate.risk_upper_bound > b.certificate.risk_upper_bound;
              }
              return a.slice_name < b.slice_name;
            });
  out.spent_failure_probability = SlicesSpent(out.rule, shares, total);
  const SliceCertificate& worst = out.slice_certificates.front();
  out.worst_slice_upper_bound = worst.certificate.risk_upper_bound;
  out.worst_slice_name = worst.slice_name;
  out.statement = absl::StrFormat(
      "with probability >= 1 - %s, no slice's true error exceeds %s (the largest of the %d "
      "slices' Clopper-Pearson upper bounds, slice '%s'); shares: %s",
      FailureProbabilityText(out.spent_failure_probability),
      FailureProbabilityText(out.worst_slice_upper_bound),
      slices.size(), out.worst_slice_name,
      SliceShareRuleText(out.rule, !sharing.weights.empty()));
  return out;
}

}  // namespace riskbound::core
