#include "service/core/certify.h"

#include <algorithm>
#include <cmath>
#include <set>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "service/core/families.h"

namespace riskbound::core {
namespace {

// Relative slack allowed on a weight sum that should be <= 1 (rounding).
constexpr double kWeightSumSlack = 1e-12;

void CheckCounts(const std::string& prefix, const SampleCounts& counts,
                 std::vector<FieldViolation>* out) {
  if (counts.samples == 0) {
    out->push_back({prefix + ".sample_count", "must be at least 1"});
  } else if (counts.samples > kMaxSampleCount) {
    out->push_back({prefix + ".sample_count",
                    absl::StrCat("must be at most 2^53 = ", kMaxSampleCount, ", got ",
                                 counts.samples)});
  }
  if (counts.errors > counts.samples) {
    out->push_back({prefix + ".error_count",
                    absl::StrCat(counts.errors, " errors exceed the ", counts.samples,
                                 " samples they were counted on")});
  }
}

std::vector<const FamilySpec*> RecommendedFamily(const Evidence& e) {
  Family f = Family::kVcAdditive;
  if (e.holdout.has_value()) {
    f = Family::kHoldoutExactBinomial;
  } else if (e.training.has_value() && e.training->capacity.log_hypothesis_count) {
    f = Family::kOccamKl;
  }
  return {FindFamily(f)};
}

}  // namespace

absl::Status ValidateEvidence(const Evidence& evidence, std::vector<FieldViolation>* out) {
  std::vector<FieldViolation> local;
  std::vector<FieldViolation>* v = out != nullptr ? out : &local;
  const std::size_t before = v->size();
  if (!evidence.holdout.has_value() && !evidence.training.has_value()) {
    v->push_back({"evidence",
                  "no evidence: give hold-out counts (evidence.holdout) or training "
                  "counts with a capacity (evidence.training)"});
  }
  if (evidence.holdout.has_value()) CheckCounts("evidence.holdout", *evidence.holdout, v);
  if (evidence.training.has_value()) {
    const TrainingEvidence& t = *evidence.training;
    CheckCounts("evidence.training", t.counts, v);
    if (!t.capacity.vc_dimension.has_value() &&
        !t.capacity.log_hypothesis_count.has_value()) {
      v->push_back({"evidence.training.capacity",
                    "a training-set bound needs a capacity: vc_dimension, "
                    "hypothesis_count or log_hypothesis_count"});
    }
    if (t.capacity.log_hypothesis_count.has_value()) {
      CheckNonNegativeFinite("evidence.training.capacity.log_hypothesis_count",
                             *t.capacity.log_hypothesis_count, v);
    }
  }
  if (evidence.baseline_error_rate.has_value()) {
    CheckProbabilityOpen("evidence.baseline_error_rate", *evidence.baseline_error_rate, v);
  }
  if (out != nullptr) return v->size() == before ? absl::OkStatus() : InvalidFields(*v);
  return InvalidFields(local);
}

absl::StatusOr<CertifyResult> Certify(const CertifyRequest& request) {
  std::vector<FieldViolation> violations;
  CheckProbabilityOpen("failure_probability", request.delta, &violations);
  ValidateEvidence(request.evidence, &violations).IgnoreError();
  if (!violations.empty()) return InvalidFields(violations);

  std::vector<const FamilySpec*> chosen;
  switch (request.choice) {
    case FamilyChoice::kRecommended:
      chosen = RecommendedFamily(request.evidence);
      break;
    case FamilyChoice::kAllApplicable:
      for (const FamilySpec& spec : Families()) {
        if (spec.applies(request.evidence)) chosen.push_back(&spec);
      }
      break;
    case FamilyChoice::kListed: {
      if (request.families.empty()) {
        violations.push_back({"listed.families", "list at least one bound family"});
      }
      std::set<Family> seen;
      for (std::size_t i = 0; i < request.families.size(); ++i) {
        const std::string field = absl::StrCat("listed.families[", i, "]");
        const FamilySpec* spec = FindFamily(request.families[i]);
        if (spec == nullptr) {
          violations.push_back({field, "unknown bound family"});
        } else if (!seen.insert(spec->family).second) {
          violations.push_back({field, absl::StrCat(spec->slug, " is listed twice")});
        } else if (!spec->applies(request.evidence)) {
          violations.push_back(
              {field, absl::StrCat(spec->slug, " needs ", spec->needs)});
        } else {
          chosen.push_back(spec);
        }
      }
      break;
    }
  }
  // kRecommended always finds one; the evidence check guarantees some family applies.
  if (chosen.empty() && violations.empty()) {
    violations.push_back({"evidence", "no bound family applies to this evidence"});
  }

  const std::size_t k = chosen.size();
  std::vector<double> weights(k, k == 0 ? 0.0 : 1.0 / static_cast<double>(k));
  const bool weighted = !request.delta_weights.empty();
  if (weighted) {
    if (request.choice != FamilyChoice::kListed) {
      violations.push_back(
          {"listed.delta_weights", "weights go with an explicit list of families"});
    } else if (request.delta_weights.size() != request.families.size()) {
      violations.push_back(
          {"listed.delta_weights",
           absl::StrCat("give one weight per listed family: ", request.families.size(),
                        " families, ", request.delta_weights.size(), " weights")});
    } else {
      double sum = 0.0;
      for (std::size_t i = 0; i < request.delta_weights.size(); ++i) {
        const double w = request.delta_weights[i];
        if (!std::isfinite(w) || w <= 0.0 || w > 1.0) {
          violations.push_back({absl::StrCat("listed.delta_weights[", i, "]"),
                                "must be a weight in (0, 1]"});
        }
        sum += w;
      }
      if (sum > 1.0 + kWeightSumSlack) {
        violations.push_back({"listed.delta_weights",
                              absl::StrFormat("weights must sum to at most 1, got %.12g", sum)});
      }
      if (violations.empty()) weights = request.delta_weights;
    }
  }
  if (!violations.empty()) return InvalidFields(violations);

  CertifyResult result;
  for (std::size_t i = 0; i < k; ++i) {
    const double delta_i = request.delta * weights[i];
    Certificate c = chosen[i]->compute(request.evidence, delta_i);
    if (request.evidence.baseline_error_rate.has_value() &&
        c.upper_bound >= *request.evidence.baseline_error_rate) {
      c.vacuous = true;
    }
    result.total_delta += delta_i;
    result.certificates.push_back(std::move(c));
  }
  for (std::size_t i = 1; i < k; ++i) {
    if (result.certificates[i].upper_bound <
        result.certificates[result.tightest_index].upper_bound) {
      result.tightest_index = i;
    }
  }
  if (k == 1) {
    result.delta_rule = absl::StrFormat(
        "one family, computed at the full failure probability delta = %g", request.delta);
  } else if (weighted) {
    result.delta_rule = absl::StrFormat(
        "union bound over %d families with the caller's weights: family j is computed "
        "at delta * w_j; the tightest certificate holds with probability >= 1 - %g",
        k, result.total_delta);
  } else {
    result.delta_rule = absl::StrFormat(
        "union bound over %d families: each computed at delta/%d = %g, so the tightest "
        "certificate holds with probability >= 1 - %g",
        k, k, request.delta / static_cast<double>(k), result.total_delta);
  }
  return result;
}

const std::vector<std::string>& Cautions() {
  static const std::vector<std::string>* const kCautions = new std::vector<std::string>{
      "Every bound assumes the evaluated examples are independent draws from the "
      "distribution the model will meet in deployment; grouped or time-ordered data "
      "must be counted in independent units.",
      "A certificate says nothing about distribution shift, fairness across groups, "
      "or misuse of the model.",
      "Where a model decides about people, money or health, a certificate never "
      "replaces model-risk review, local regulations or licensed professional practice.",
  };
  return *kCautions;
}

}  // namespace riskbound::core
