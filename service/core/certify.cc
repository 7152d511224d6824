#include "service/core/certify.h"

#include <algorithm>
#include <cmath>
#include <set>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "absl/strings/str_join.h"
#include "service/core/capacity.h"
#include "service/core/delta_split.h"
#include "service/core/families.h"
#include "service/core/limits.h"

namespace riskbound::core {
namespace {

constexpr double kTwoTo64 = 18446744073709551616.0;

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
  } else if (e.relabel.has_value()) {
    f = e.relabel->scheme == RelabelScheme::kHalfFlip ? Family::kMaximalDiscrepancy
                                                      : Family::kRademacher;
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

void CheckBoundedLoss(const BoundedLossEvidence& b, const std::string& p,
                      std::vector<FieldViolation>* out) {
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

void CheckPacBayes(const PacBayesEvidence& pb, const std::string& p,
                   std::vector<FieldViolation>* out) {
  CheckNonNegativeFinite(p + ".kl_divergence", pb.kl_divergence, out);
  CheckProbabilityClosed(p + ".gibbs_empirical_risk", pb.gibbs_empirical_risk, out);
  CheckSampleCount(p + ".sample_count", pb.sample_count, out);
  if (pb.target != PacBayesTarget::kGibbs && pb.target != PacBayesTarget::kMajorityVote) {
    out->push_back({p + ".target",
                    "required: say which classifier is bounded, the Gibbs (randomized) "
                    "classifier or the majority vote (unset, or a value this server does not "
                    "know)"});
  }
}

void CheckRademacher(const RademacherEvidence& r, const std::string& p,
                     std::vector<FieldViolation>* out) {
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

void CheckRelabel(const RelabelEvidence& r, bool has_rademacher, const std::string& p,
                  std::vector<FieldViolation>* out) {
  CheckSampleCounts(p, r, out);
  const bool half = r.scheme == RelabelScheme::kHalfFlip;
  if (r.scheme != RelabelScheme::kRandomSigns && !half) {
    out->push_back({p + ".scheme",
                    "required: say how the labels were changed, random signs "
                    "(RELABEL_SCHEME_RANDOM_SIGNS) or a half flipped (RELABEL_SCHEME_HALF_FLIP) "
                    "(unset, or a value this server does not know)"});
  }
  if (r.training != RelabelTraining::kExact && r.training != RelabelTraining::kApproximate) {
    out->push_back({p + ".training",
                    "required: say whether every retraining reached the minimum 0-1 training "
                    "error over the class (RELABEL_TRAINING_EXACT) or not "
                    "(RELABEL_TRAINING_APPROXIMATE)"});
  }
  if (has_rademacher && r.scheme == RelabelScheme::kRandomSigns) {
    out->push_back({p,
                    "give the Rademacher complexity once: averaged (evidence.rademacher) or "
                    "as raw draws (evidence.relabel), not both"});
  }
  if (r.draws.empty()) {
    out->push_back({p + ".draws", "give at least one retraining"});
  } else if (r.draws.size() > kMaxRelabelDrawCount) {
    out->push_back({p + ".draws", absl::StrCat("at most ", kMaxRelabelDrawCount,
                                               " retrainings, got ", r.draws.size())});
    return;
  }
  const std::uint64_t m = r.sample_count;
  if (half && m % 2 == 1) {
    out->push_back({p + ".sample_count",
                    absl::StrCat("must be even for a half flip (two halves of sample_count / 2 "
                                 "examples), got ",
                                 m)});
  }
  std::size_t reported = 0;  // at most 10 draws named, then a count
  std::size_t unreported = 0;
  std::uint64_t unreported_violations = 0;
  for (std::size_t j = 0; j < r.draws.size(); ++j) {
    const RelabelDraw& d = r.draws[j];
    const std::string at = absl::StrCat(p, ".draws[", j, "].");
    std::vector<FieldViolation> found;
    if (half) {
      if (d.relabelled_error_count != 0) {
        found.push_back({at + "relabelled_error_count", "is not used by a half flip (set 0)"});
      }
      for (const auto& [name, value] : {std::pair<const char*, std::uint64_t>{
                                            "flipped_half_error_count", d.flipped_half_error_count},
                                        {"kept_half_error_count", d.kept_half_error_count}}) {
        if (value > m / 2) {
          found.push_back({at + name, absl::StrCat(value, " errors exceed the ", m / 2,
                                                   " examples of a half")});
        }
      }
    } else {
      if (d.relabelled_error_count > m) {
        found.push_back({at + "relabelled_error_count",
                         absl::StrCat(d.relabelled_error_count, " errors exceed the ", m,
                                      " samples they were counted on")});
      }
      if (d.flipped_half_error_count != 0 || d.kept_half_error_count != 0) {
        found.push_back({at + (d.flipped_half_error_count != 0 ? "flipped_half_error_count"
                                                               : "kept_half_error_count"),
                         "is not used by random signs (set 0)"});
      }
    }
    if (found.empty()) continue;
    if (reported < 10) {
      out->insert(out->end(), found.begin(), found.end());
      ++reported;
    } else {
      ++unreported;
      unreported_violations += found.size();
    }
  }
  if (unreported > 0) {
    // Stands for every violation of the unlisted draws, so that the error
    // details' violation_count counts them all.
    out->push_back({p + ".draws",
                    absl::StrCat("and ", unreported, " more invalid draws were not listed"),
                    unreported_violations - 1});
  }
}

void CheckCompression(const CompressionEvidence& c, const std::string& p,
                      std::vector<FieldViolation>* out) {
  CheckSampleCount(p + ".sample_count", c.sample_count, out);
  if (c.compression_size > c.sample_count) {
    out->push_back({p + ".compression_size",
                    absl::StrCat("a compression set of ", c.compression_size,
                                 " examples exceeds the ", c.sample_count, " training examples")});
  } else if (c.outside_error_count > c.sample_count - c.compression_size) {
    out->push_back(
        {p + ".outside_error_count", absl::StrCat(c.outside_error_count, " errors exceed the ",
                                                  c.sample_count - c.compression_size,
                                                  " examples outside the compression set")});
  }
}

// The value for people: an integer when it fits, else %.6g.
std::string FormatCapacity(const CapacityEstimate& e) {
  if (!e.exceeds_uint64 && e.vc_dimension < kTwoTo64) {
    return absl::StrCat(static_cast<std::uint64_t>(e.vc_dimension));
  }
  return absl::StrFormat("%.6g", e.vc_dimension);
}

// The model part of ResolveCapacity: the catalogue's estimate as the measure
// the families read, with its provenance note.
void ResolveModel(ClassCapacity* c, const std::string& model_path,
                  std::vector<FieldViolation>* out) {
  const absl::StatusOr<CapacityEstimate> e =
      EstimateCapacity(*c->model, StopToken::Never(), model_path);
  if (!e.ok()) {
    ViolationReport found = ViolationReportOf(e.status());
    if (found.listed.empty() && found.unlisted_count == 0) {
      // Not a field error (should not happen): report it on the model itself.
      found.listed.push_back({model_path, std::string(e.status().message())});
    }
    // The catalogue listed at most kMaxListedViolations (e.g. 1000 zero
    // layer widths): keep one slot for a violation on the model counting the
    // rest, so the count survives into the request's own list.
    std::uint64_t unlisted = found.unlisted_count;
    if (unlisted > 0 && found.listed.size() >= kMaxListedViolations) {
      unlisted += found.listed.size() - (kMaxListedViolations - 1);
      found.listed.resize(kMaxListedViolations - 1);
    }
    for (FieldViolation& v : found.listed) out->push_back(std::move(v));
    if (unlisted > 0) {
      out->push_back(
          {model_path,
           absl::StrCat("and ", unlisted,
                        unlisted == 1 ? " more invalid field of this model was not listed"
                                      : " more invalid fields of this model were not listed"),
           unlisted - 1});
    }
    return;
  }
  const std::string kind(ModelKindTitle(*c->model->kind));
  if (e->status == CapacityStatus::kInfinite) {
    out->push_back(
        {model_path, absl::StrCat("a model of kind \"", kind,
                                  "\" has infinite VC dimension, so no VC or Occam bound "
                                  "applies (",
                                  e->source, "); ", absl::StrJoin(e->notes, "; "))});
    return;
  }
  if (e->log_hypothesis_count.has_value()) {
    c->log_hypothesis_count = *e->log_hypothesis_count;
    c->notes.push_back(absl::StrFormat(
        "capacity used: ln |H| = %.6g, from the capacity catalogue (model kind: %s; %s; "
        "source: %s)",
        *e->log_hypothesis_count, kind, e->formula, e->source));
    c->model.reset();
    return;
  }
  if (e->exceeds_uint64 || !(e->vc_dimension < kTwoTo64)) {
    out->push_back(
        {model_path,
         absl::StrFormat("the VC dimension bound exceeds 2^64 (%s for model kind \"%s\"); "
                         "the VC families would be vacuous: use hold-out bounds",
                         FormatCapacity(*e), kind)});
    return;
  }
  // The catalogue's values are integers already (upper bounds floored after
  // an upward nudge); ceil keeps any non-integer on the safe side.
  c->vc_dimension = static_cast<std::uint64_t>(std::ceil(e->vc_dimension));
  const bool exact = e->status == CapacityStatus::kExact;
  c->notes.push_back(absl::StrCat(
      "capacity used: VC dimension ", exact ? "h = " : "h <= ", *c->vc_dimension,
      exact ? " (exact)" : " (an upper bound: the certificate stays valid, only looser)",
      ", from the capacity catalogue (model kind: ", kind, "; ", e->formula,
      "; source: ", e->source, ")"));
  c->model.reset();
}

// The listed families (kListed): each known, at most once, applicable.
// Families that read the training capacity are not judged when that
// capacity could not be resolved (its own violation says why).
void CheckListed(const FamilyList& listed, const Evidence& evidence, bool capacity_ok,
                 std::vector<const FamilySpec*>* chosen, std::vector<FieldViolation>* v) {
  if (listed.families.empty()) {
    v->push_back({"listed.families", "list at least one bound family"});
  }
  std::set<Family> seen;
  for (std::size_t i = 0; i < listed.families.size(); ++i) {
    const std::string field = absl::StrCat("listed.families[", i, "]");
    const FamilySpec* spec =
        listed.families[i].has_value() ? FindFamily(*listed.families[i]) : nullptr;
    if (spec == nullptr) {
      v->push_back({field,
                    "unknown bound family (unset, or a value this server does not know; "
                    "ListFamilies lists them)"});
    } else if (!seen.insert(spec->family).second) {
      v->push_back({field, absl::StrCat(spec->family_name, " is listed twice")});
    } else if (spec->capacity_measure != CapacityMeasure::kNone && !capacity_ok) {
      continue;
    } else if (!spec->applies(evidence)) {
      v->push_back({field, absl::StrCat(spec->family_name, " needs ", spec->evidence_needed)});
    } else {
      chosen->push_back(spec);
    }
  }
}

// The caller's weights of a listed request: one per family, each in (0, 1],
// their exact sum at most 1. Returns them, or nothing for equal shares.
std::vector<double> CheckWeights(const CertifyRequest& request,
                                 std::vector<FieldViolation>* v) {
  const std::vector<double>& given = request.listed.delta_weights;
  if (given.empty()) return {};
  if (request.family_choice != FamilyChoice::kListed) {
    v->push_back({"listed.delta_weights", "weights go with an explicit list of families"});
    return {};
  }
  if (given.size() != request.listed.families.size()) {
    v->push_back({"listed.delta_weights", absl::StrCat("give one weight per listed family: ",
                                                       request.listed.families.size(),
                                                       " families, ", given.size(), " weights")});
    return {};
  }
  bool each_ok = true;
  std::vector<double> usable;  // the finite, non-negative ones, for the sum
  for (std::size_t i = 0; i < given.size(); ++i) {
    const double w = given[i];
    if (!std::isfinite(w) || w <= 0.0 || w > 1.0) {
      v->push_back({absl::StrCat("listed.delta_weights[", i, "]"), "must be a weight in (0, 1]"});
      each_ok = false;
    }
    if (std::isfinite(w) && w >= 0.0) usable.push_back(w);
  }
  // Exactly, not in rounded double arithmetic: [0.5, 0.5000000000000001]
  // sums to more than 1 and would overspend the failure probability.
  if (!WeightsSumAtMostOne(usable)) {
    v->push_back({"listed.delta_weights",
                  WeightSumMessage(usable, each_ok ? "listed.delta_weights" : "")});
    each_ok = false;
  }
  return each_ok ? given : std::vector<double>();
}

// A Certify request after its checks: the evidence with its capacity
// resolved, the families to compute and their weights.
struct Checked {
  Evidence evidence;
  std::vector<const FamilySpec*> chosen;
  // The caller's weights; empty for equal shares.
  std::vector<double> weights;
};

// Appends every violation of `request` to `v`; the result is usable only
// when it appended none.
Checked Check(const CertifyRequest& request, std::vector<FieldViolation>* v) {
  Checked out;
  out.evidence = request.evidence;
  CheckProbabilityOpen("failure_probability", request.failure_probability, v);
  std::vector<FieldViolation> evidence_violations;
  PrepareEvidence(&out.evidence, "evidence", &evidence_violations);
  const bool capacity_ok = std::none_of(
      evidence_violations.begin(), evidence_violations.end(),
      [](const FieldViolation& e) { return e.field.rfind("evidence.training.capacity", 0) == 0; });
  v->insert(v->end(), evidence_violations.begin(), evidence_violations.end());
  const bool overall = HasOverallEvidence(out.evidence);
  switch (request.family_choice) {
    case FamilyChoice::kRecommended:
      // Slices alone: the slice certificates are the answer.
      if (overall) out.chosen = RecommendedFamily(out.evidence);
      break;
    case FamilyChoice::kAllApplicable:
      for (const FamilySpec& spec : Families()) {
        // holdout-anytime is never tighter than holdout-binomial at the same
        // delta (it pays for validity at every sample size): in "all" it
        // would only take a share of delta from the others. Listed, it is
        // computed.
        if (spec.family == Family::kHoldoutAnytime) continue;
        if (spec.applies(out.evidence)) out.chosen.push_back(&spec);
      }
      break;
    case FamilyChoice::kListed:
      CheckListed(request.listed, out.evidence, capacity_ok, &out.chosen, v);
      break;
  }
  // kRecommended always finds one; the evidence check guarantees some family
  // applies.
  if (out.chosen.empty() && overall && v->empty()) {
    v->push_back({"evidence", "no bound family applies to this evidence"});
  }
  out.weights = CheckWeights(request, v);
  const SliceSharing unset;
  if (!out.evidence.slices.empty()) {
    CheckSliceSharing(request.slice_sharing, out.evidence.slices, "slice_sharing", v);
  } else if (request.slice_sharing.rule != unset.rule || !request.slice_sharing.weights.empty()) {
    v->push_back({"slice_sharing", "goes with per-slice counts (evidence.slices): none given"});
  }
  return out;
}

}  // namespace

void CheckSampleCounts(const std::string& prefix, const SampleCounts& counts,
                       std::vector<FieldViolation>* out) {
  CheckSampleCount(prefix + ".sample_count", counts.sample_count, out);
  if (counts.error_count > counts.sample_count) {
    out->push_back({prefix + ".error_count",
                    absl::StrCat(counts.error_count, " errors exceed the ", counts.sample_count,
                                 " samples they were counted on")});
  }
}

bool ResolveCapacity(ClassCapacity* c, const std::string& path, std::vector<FieldViolation>* out) {
  const std::size_t before = out->size();
  const bool vc = c->vc_dimension.has_value();
  const bool finite = c->hypothesis_count.has_value() || c->log_hypothesis_count.has_value();
  const bool model = c->model.has_value();
  if (!vc && !finite && !model) {
    out->push_back({path,
                    "required: vc_dimension, hypothesis_count, log_hypothesis_count or a model "
                    "description"});
  } else if ((c->hypothesis_count.has_value() && c->log_hypothesis_count.has_value()) ||
             (model && (vc || finite))) {
    // The API's oneof gives one measure; a core caller may give the VC
    // dimension and ln |H| of one class, never two spellings of one measure.
    out->push_back({path,
                    "give one of vc_dimension, hypothesis_count, log_hypothesis_count and a "
                    "model description"});
  } else if (model) {
    ResolveModel(c, path + ".model", out);
  } else if (c->hypothesis_count.has_value()) {
    if (*c->hypothesis_count == 0) {
      out->push_back({path + ".hypothesis_count", "must be at least 1"});
    } else {
      c->log_hypothesis_count = std::log(static_cast<double>(*c->hypothesis_count));
      c->hypothesis_count.reset();
    }
  } else if (c->log_hypothesis_count.has_value()) {
    CheckNonNegativeFinite(path + ".log_hypothesis_count", *c->log_hypothesis_count, out);
  }
  return out->size() == before;
}

bool HasOverallEvidence(const Evidence& e) {
  return e.holdout.has_value() || e.training.has_value() || e.bounded_loss.has_value() ||
         e.pac_bayes.has_value() || e.rademacher.has_value() || e.compression.has_value() ||
         e.relabel.has_value();
}

bool PrepareEvidence(Evidence* evidence, const std::string& prefix,
                     std::vector<FieldViolation>* v) {
  const std::size_t before = v->size();
  if (!HasOverallEvidence(*evidence) && evidence->slices.empty()) {
    v->push_back({prefix, absl::StrCat("no evidence: give hold-out counts (", prefix,
                                       ".holdout), training counts with a capacity (", prefix,
                                       ".training), a bounded loss (", prefix,
                                       ".bounded_loss), a PAC-Bayes posterior (", prefix,
                                       ".pac_bayes), a Rademacher complexity (", prefix,
                                       ".rademacher), a compression scheme (", prefix,
                                       ".compression), relabel-and-retrain draws (", prefix,
                                       ".relabel) or per-slice hold-out counts (", prefix,
                                       ".slices)")});
  }
  if (!evidence->slices.empty()) CheckSlices(evidence->slices, prefix + ".slices", v);
  if (evidence->holdout.has_value()) {
    CheckSampleCounts(prefix + ".holdout", *evidence->holdout, v);
  }
  if (evidence->training.has_value()) {
    CheckSampleCounts(prefix + ".training", *evidence->training, v);
    ResolveCapacity(&evidence->training->capacity, prefix + ".training.capacity", v);
  }
  if (evidence->baseline_error_rate.has_value()) {
    CheckProbabilityOpen(prefix + ".baseline_error_rate", *evidence->baseline_error_rate, v);
  }
  if (evidence->bounded_loss.has_value()) {
    CheckBoundedLoss(*evidence->bounded_loss, prefix + ".bounded_loss", v);
  }
  if (evidence->pac_bayes.has_value()) {
    CheckPacBayes(*evidence->pac_bayes, prefix + ".pac_bayes", v);
  }
  if (evidence->rademacher.has_value()) {
    CheckRademacher(*evidence->rademacher, prefix + ".rademacher", v);
  }
  if (evidence->compression.has_value()) {
    CheckCompression(*evidence->compression, prefix + ".compression", v);
  }
  if (evidence->relabel.has_value()) {
    CheckRelabel(*evidence->relabel, evidence->rademacher.has_value(), prefix + ".relabel", v);
  }
  return v->size() == before;
}

absl::Status ValidateEvidence(const Evidence& evidence, std::vector<FieldViolation>* out,
                              const std::string& prefix) {
  std::vector<FieldViolation> local;
  std::vector<FieldViolation>* v = out != nullptr ? out : &local;
  const std::size_t before = v->size();
  Evidence copy = evidence;
  PrepareEvidence(&copy, prefix, v);
  if (out != nullptr) return v->size() == before ? absl::OkStatus() : InvalidFields(*v);
  return InvalidFields(local);
}

absl::Status ValidateCertifyRequest(const CertifyRequest& request) {
  std::vector<FieldViolation> violations;
  Check(request, &violations);
  return InvalidFields(violations);
}

absl::StatusOr<CertifyResult> Certify(const CertifyRequest& request, const StopToken& stop) {
  std::vector<FieldViolation> violations;
  const Checked checked = Check(request, &violations);
  if (!violations.empty()) return InvalidFields(violations);

  const std::size_t k = checked.chosen.size();
  const bool weighted = !checked.weights.empty();
  const bool with_slices = !checked.evidence.slices.empty();
  // With slices and other evidence, each part gets half (exact for a double
  // in (0, 1) above the subnormals; EqualShare rounds down below them).
  const double overall_delta =
      with_slices ? EqualShare(request.failure_probability, 2) : request.failure_probability;
  // Each share rounded toward zero (delta_split.h), so the shares' exact sum
  // never exceeds the request.
  std::vector<double> shares(k);
  for (std::size_t i = 0; i < k; ++i) {
    shares[i] = weighted ? WeightedShare(overall_delta, checked.weights[i])
                         : EqualShare(overall_delta, k);
  }
  CertifyResult result;
  result.requested_failure_probability = request.failure_probability;
  result.cautions = Cautions();
  if (with_slices) {
    const double slice_delta = k == 0 ? request.failure_probability : overall_delta;
    result.slices = CertifySlices(checked.evidence.slices, request.slice_sharing, slice_delta);
    for (const std::string& c : SliceCautions()) result.cautions.push_back(c);
    if (k == 0) {
      result.rule = "slices only: the slices get the whole failure probability";
      return result;
    }
  }
  for (std::size_t i = 0; i < k; ++i) {
    if (stop.StopRequested()) return stop.Status();
    const double delta_i = shares[i];
    Certificate c = checked.chosen[i]->compute(checked.evidence, delta_i);
    if (checked.chosen[i]->capacity_measure != CapacityMeasure::kNone &&
        checked.evidence.training.has_value()) {
      const std::vector<std::string>& n = checked.evidence.training->capacity.notes;
      c.notes.insert(c.notes.end(), n.begin(), n.end());
    }
    // The baseline is an error rate: it says nothing about a loss in other units.
    if (checked.evidence.baseline_error_rate.has_value() && !c.loss_range.has_value() &&
        c.risk_upper_bound >= *checked.evidence.baseline_error_rate) {
      c.vacuous = true;
    }
    result.certificates.push_back(std::move(c));
  }
  // Error-rate certificates and bounded-loss certificates (other units) are
  // never compared: the tightest is taken among the error-rate ones when
  // there are any, else among the bounded-loss ones (all on the same loss).
  // Heuristic certificates (not bounds) are candidates only when no valid
  // one is.
  bool any_error_rate = false;
  for (const Certificate& c : result.certificates) any_error_rate |= !c.loss_range.has_value();
  bool found = false;
  for (const bool allow_heuristic : {false, true}) {
    for (std::size_t i = 0; i < k && !(found && allow_heuristic); ++i) {
      const Certificate& c = result.certificates[i];
      if (any_error_rate && c.loss_range.has_value()) continue;
      if (c.heuristic && !allow_heuristic) continue;
      if (!found ||
          c.risk_upper_bound < result.certificates[result.tightest_index].risk_upper_bound) {
        result.tightest_index = i;
        found = true;
      }
    }
    if (found) break;
  }
  if (stop.StopRequested()) return stop.Status();
  result.spent_failure_probability = SpentOf(shares);
  const std::string spent = FailureProbabilityText(result.spent_failure_probability);
  if (k == 1 && !weighted) {
    result.rule =
        with_slices
            ? absl::StrFormat("one family, computed at the certificates' half, delta/2 = %s",
                              FailureProbabilityText(overall_delta))
            : absl::StrFormat("one family, computed at the full failure probability delta = %s",
                              FailureProbabilityText(overall_delta));
  } else if (weighted) {
    result.rule = absl::StrFormat(
        "union bound over %d %s with the caller's weights: family j is computed "
        "at delta * w_j (rounded down); the tightest certificate holds with probability "
        ">= 1 - %s",
        k, k == 1 ? "family" : "families", spent);
  } else {
    result.rule = absl::StrFormat(
        "union bound over %d families: each computed at delta/%d (rounded down, at most "
        "%s), so the tightest certificate holds with probability >= 1 - %s",
        k, k, FailureProbabilityText(shares[0]), spent);
  }
  if (with_slices) {
    result.rule = absl::StrCat(
        "half of the failure probability to the certificates, half to the slices (",
        FailureProbabilityText(overall_delta), " each); certificates: ", result.rule);
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
