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

// The families that read evidence.training.capacity: their certificates carry
// the capacity's provenance notes (ClassCapacity::notes).
bool UsesTrainingCapacity(Family f) {
  return f == Family::kVcAdditive || f == Family::kVcRelative ||
         f == Family::kOccamHoeffding || f == Family::kOccamKl;
}

// The fixed rule documented at FamilyChoice::kRecommended (certify.h).
std::vector<const FamilySpec*> RecommendedFamily(const Evidence& e) {
  Family f = Family::kVcAdditive;
  if (e.holdout.has_value()) {
    f = Family::kHoldoutExactBinomial;
  } else if (e.bounded_loss.has_value()) {
    f = Family::kBoundedKl;
  } else if (e.compression.has_value()) {
    f = Family::kSampleCompression;
  } else if (e.pac_bayes.has_value()) {
    f = Family::kPacBayesKl;
  } else if (e.training.has_value() && e.training->capacity.log_hypothesis_count) {
    f = Family::kOccamKl;
  } else if (e.rademacher.has_value()) {
    f = Family::kRademacher;
  }
  return {FindFamily(f)};
}

// A sample count: at least 1 and at most 2^53.
void CheckSampleCount(const std::string& field, std::uint64_t samples,
                      std::vector<FieldViolation>* out) {
  if (samples == 0) {
    out->push_back({field, "must be at least 1"});
  } else if (samples > kMaxSampleCount) {
    out->push_back({field, absl::StrCat("must be at most 2^53 = ", kMaxSampleCount,
                                        ", got ", samples)});
  }
}

// Relative slack on the largest possible sample variance (rounding in the
// caller's variance computation).
constexpr double kVarianceSlack = 1e-9;

void CheckBoundedLoss(const BoundedLossEvidence& b, std::vector<FieldViolation>* out) {
  const std::string p = "evidence.bounded_loss";
  CheckSampleCount(p + ".sample_count", b.sample_count, out);
  const bool min_ok = std::isfinite(b.loss_min);
  const bool max_ok = std::isfinite(b.loss_max);
  if (!min_ok) out->push_back({p + ".loss_min", "must be a finite number"});
  if (!max_ok) out->push_back({p + ".loss_max", "must be a finite number"});
  bool range_ok = min_ok && max_ok;
  if (range_ok && !(b.loss_min < b.loss_max)) {
    out->push_back({p + ".loss_max",
                    absl::StrFormat("must be larger than loss_min (got loss_min = %g, "
                                    "loss_max = %g)", b.loss_min, b.loss_max)});
    range_ok = false;
  } else if (range_ok && !std::isfinite(b.loss_max - b.loss_min)) {
    out->push_back({p + ".loss_max", "loss_max - loss_min overflows a double"});
    range_ok = false;
  }
  if (!std::isfinite(b.mean_loss)) {
    out->push_back({p + ".mean_loss", "must be a finite number"});
  } else if (range_ok && (b.mean_loss < b.loss_min || b.mean_loss > b.loss_max)) {
    out->push_back({p + ".mean_loss",
                    absl::StrFormat("%g lies outside [loss_min, loss_max] = [%g, %g]",
                                    b.mean_loss, b.loss_min, b.loss_max)});
  }
  if (!std::isfinite(b.sample_variance) || b.sample_variance < 0.0) {
    out->push_back({p + ".sample_variance", "must be a finite number >= 0"});
  } else if (range_ok && b.sample_count >= 2) {
    // In units of (b - a)^2: at most 1/4 * n/(n-1) for values in [a, b].
    const double width = b.loss_max - b.loss_min;
    const double n = static_cast<double>(b.sample_count);
    const double limit = 0.25 * n / (n - 1.0);
    if (b.sample_variance / width / width > limit * (1.0 + kVarianceSlack)) {
      out->push_back(
          {p + ".sample_variance",
           absl::StrFormat("%g exceeds (loss_max - loss_min)^2 / 4 * n / (n - 1) = %g, the "
                           "largest unbiased variance of values in [loss_min, loss_max]",
                           b.sample_variance, limit * width * width)});
    }
  }
}

void CheckPacBayes(const PacBayesEvidence& pb, std::vector<FieldViolation>* out) {
  const std::string p = "evidence.pac_bayes";
  CheckNonNegativeFinite(p + ".kl_divergence", pb.kl_divergence, out);
  CheckProbabilityClosed(p + ".gibbs_empirical_risk", pb.gibbs_empirical_risk, out);
  CheckSampleCount(p + ".sample_count", pb.sample_count, out);
  if (pb.target != PacBayesTarget::kGibbs && pb.target != PacBayesTarget::kMajorityVote) {
    out->push_back({p + ".target", "must be the Gibbs classifier or the majority vote"});
  }
}

void CheckRademacher(const RademacherEvidence& r, std::vector<FieldViolation>* out) {
  const std::string p = "evidence.rademacher";
  CheckSampleCounts(p, r, out);
  const double v = r.empirical_rademacher;
  if (r.sigma_draw_count == 0) {
    if (!std::isfinite(v) || v < 0.0 || v > 1.0) {
      out->push_back({p + ".empirical_rademacher",
                      "must be in [0, 1]: the exact expectation over sigma of a {-1,+1} "
                      "class is never negative nor above 1"});
    }
  } else if (!std::isfinite(v) || v < -1.0 || v > 1.0) {
    out->push_back({p + ".empirical_rademacher",
                    "must be in [-1, 1] (a Monte-Carlo average over sigma draws)"});
  }
}

void CheckCompression(const CompressionEvidence& c, std::vector<FieldViolation>* out) {
  const std::string p = "evidence.compression";
  CheckSampleCount(p + ".sample_count", c.sample_count, out);
  if (c.compression_size > c.sample_count) {
    out->push_back({p + ".compression_size",
                    absl::StrCat("a compression set of ", c.compression_size,
                                 " examples exceeds the ", c.sample_count, " training examples")});
  } else if (c.outside_error_count > c.sample_count - c.compression_size) {
    out->push_back({p + ".outside_error_count",
                    absl::StrCat(c.outside_error_count, " errors exceed the ",
                                 c.sample_count - c.compression_size,
                                 " examples outside the compression set")});
  }
}

}  // namespace

void CheckSampleCounts(const std::string& prefix, const SampleCounts& counts,
                       std::vector<FieldViolation>* out) {
  if (counts.sample_count == 0) {
    out->push_back({prefix + ".sample_count", "must be at least 1"});
  } else if (counts.sample_count > kMaxSampleCount) {
    out->push_back({prefix + ".sample_count",
                    absl::StrCat("must be at most 2^53 = ", kMaxSampleCount, ", got ",
                                 counts.sample_count)});
  }
  if (counts.error_count > counts.sample_count) {
    out->push_back({prefix + ".error_count",
                    absl::StrCat(counts.error_count, " errors exceed the ", counts.sample_count,
                                 " samples they were counted on")});
  }
}

absl::Status ValidateEvidence(const Evidence& evidence, std::vector<FieldViolation>* out) {
  std::vector<FieldViolation> local;
  std::vector<FieldViolation>* v = out != nullptr ? out : &local;
  const std::size_t before = v->size();
  if (!evidence.holdout.has_value() && !evidence.training.has_value() &&
      !evidence.bounded_loss.has_value() && !evidence.pac_bayes.has_value() &&
      !evidence.rademacher.has_value() && !evidence.compression.has_value()) {
    v->push_back({"evidence",
                  "no evidence: give hold-out counts (evidence.holdout), training "
                  "counts with a capacity (evidence.training), a bounded loss "
                  "(evidence.bounded_loss), a PAC-Bayes posterior (evidence.pac_bayes), "
                  "a Rademacher complexity (evidence.rademacher) or a compression "
                  "scheme (evidence.compression)"});
  }
  if (evidence.holdout.has_value()) CheckSampleCounts("evidence.holdout", *evidence.holdout, v);
  if (evidence.training.has_value()) {
    const TrainingEvidence& t = *evidence.training;
    CheckSampleCounts("evidence.training", t, v);
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
  if (evidence.bounded_loss.has_value()) CheckBoundedLoss(*evidence.bounded_loss, v);
  if (evidence.pac_bayes.has_value()) CheckPacBayes(*evidence.pac_bayes, v);
  if (evidence.rademacher.has_value()) CheckRademacher(*evidence.rademacher, v);
  if (evidence.compression.has_value()) CheckCompression(*evidence.compression, v);
  if (out != nullptr) return v->size() == before ? absl::OkStatus() : InvalidFields(*v);
  return InvalidFields(local);
}

absl::StatusOr<CertifyResult> Certify(const CertifyRequest& request, const StopToken& stop) {
  std::vector<FieldViolation> violations;
  CheckProbabilityOpen("failure_probability", request.failure_probability, &violations);
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
    if (stop.StopRequested()) return stop.Status();
    const double delta_i = request.failure_probability * weights[i];
    Certificate c = chosen[i]->compute(request.evidence, delta_i);
    if (UsesTrainingCapacity(c.family) && request.evidence.training.has_value()) {
      const std::vector<std::string>& n = request.evidence.training->capacity.notes;
      c.notes.insert(c.notes.end(), n.begin(), n.end());
    }
    // The baseline is an error rate: it says nothing about a loss in other units.
    if (request.evidence.baseline_error_rate.has_value() && !c.loss_range.has_value() &&
        c.risk_upper_bound >= *request.evidence.baseline_error_rate) {
      c.vacuous = true;
    }
    result.spent_failure_probability += delta_i;
    result.certificates.push_back(std::move(c));
  }
  // Error-rate certificates and bounded-loss certificates (other units) are
  // never compared: the tightest is taken among the error-rate ones when
  // there are any, else among the bounded-loss ones (all on the same loss).
  bool any_error_rate = false;
  for (const Certificate& c : result.certificates) any_error_rate |= !c.loss_range.has_value();
  bool found = false;
  for (std::size_t i = 0; i < k; ++i) {
    const Certificate& c = result.certificates[i];
    if (any_error_rate && c.loss_range.has_value()) continue;
    if (!found || c.risk_upper_bound < result.certificates[result.tightest_index].risk_upper_bound) {
      result.tightest_index = i;
      found = true;
    }
  }
  if (stop.StopRequested()) return stop.Status();
  if (k == 1) {
    result.rule = absl::StrFormat(
        "one family, computed at the full failure probability delta = %g", request.failure_probability);
  } else if (weighted) {
    result.rule = absl::StrFormat(
        "union bound over %d families with the caller's weights: family j is computed "
        "at delta * w_j; the tightest certificate holds with probability >= 1 - %g",
        k, result.spent_failure_probability);
  } else {
    result.rule = absl::StrFormat(
        "union bound over %d families: each computed at delta/%d = %g, so the tightest "
        "certificate holds with probability >= 1 - %g",
        k, k, request.failure_probability / static_cast<double>(k), result.spent_failure_probability);
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
