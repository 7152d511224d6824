#include "service/core/select.h"

#include <cmath>
#include <numbers>
#include <optional>
#include <set>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "service/core/certify.h"
#include "service/core/families.h"
#include "service/core/field_violation.h"

namespace riskbound::core {
namespace {

// Relative slack allowed on a weight sum that should be <= 1 (rounding), as in
// Certify.
constexpr double kWeightSumSlack = 1e-12;

// Candidates computed between two looks at the StopToken (each costs a few
// microseconds at most).
constexpr std::size_t kStopCheckEvery = 16;

// Which capacity measure a family reads.
enum class Measure { kVcDimension, kLogHypothesisCount };

// Probes the registry: a training-set family applies to training evidence
// that carries only the measure it needs. Returns nullopt for a family that
// does not work on training evidence alone (hold-out families).
std::optional<Measure> MeasureOf(const FamilySpec& spec) {
  Evidence probe;
  probe.training = TrainingEvidence{{0, 1}, {}};
  probe.training->capacity.vc_dimension = 1;
  if (spec.applies(probe)) return Measure::kVcDimension;
  probe.training->capacity = ClassCapacity{};
  probe.training->capacity.log_hypothesis_count = 0.0;
  if (spec.applies(probe)) return Measure::kLogHypothesisCount;
  return std::nullopt;
}

// The candidate's capacity in the family's measure, or nullopt when missing.
std::optional<double> CapacityOf(const Candidate& c, Measure measure) {
  if (measure == Measure::kVcDimension) {
    if (!c.capacity.vc_dimension.has_value()) return std::nullopt;
    return static_cast<double>(*c.capacity.vc_dimension);
  }
  return c.capacity.log_hypothesis_count;
}

std::vector<double> Weights(const SelectRequest& request) {
  const std::size_t k = request.candidates.size();
  std::vector<double> w(k);
  for (std::size_t i = 0; i < k; ++i) {
    switch (request.spread) {
      case DeltaSpread::kUniform:
        w[i] = 1.0 / static_cast<double>(k);
        break;
      case DeltaSpread::kInverseSquare: {
        const double pos = static_cast<double>(i + 1);
        w[i] = 6.0 / (std::numbers::pi * std::numbers::pi * pos * pos);
        break;
      }
      case DeltaSpread::kCallerWeights:
        w[i] = request.weights[i];
        break;
    }
  }
  return w;
}

void CheckCandidates(const SelectRequest& request, std::optional<Measure> measure,
                     std::vector<FieldViolation>* v) {
  if (request.candidates.empty()) {
    v->push_back({"candidates", "give at least one candidate class"});
    return;
  }
  std::set<std::string> ids;
  std::optional<double> previous;  // capacity of the previous well-formed candidate
  for (std::size_t i = 0; i < request.candidates.size(); ++i) {
    const Candidate& c = request.candidates[i];
    const std::string prefix = absl::StrCat("candidates[", i, "]");
    if (c.id.empty()) {
      v->push_back({prefix + ".id", "give each candidate a non-empty id"});
    } else if (!ids.insert(c.id).second) {
      v->push_back({prefix + ".id", absl::StrCat("id \"", c.id, "\" is used twice")});
    }
    if (c.training.sample_count == 0) {
      v->push_back({prefix + ".training.sample_count", "must be at least 1"});
    } else if (c.training.sample_count > kMaxSampleCount) {
      v->push_back({prefix + ".training.sample_count",
                    absl::StrCat("must be at most 2^53 = ", kMaxSampleCount, ", got ",
                                 c.training.sample_count)});
    }
    if (c.training.error_count > c.training.sample_count) {
      v->push_back({prefix + ".training.error_count",
                    absl::StrCat(c.training.error_count, " errors exceed the ",
                                 c.training.sample_count, " samples they were counted on")});
    }
    if (!measure.has_value()) continue;  // the family is reported instead
    const std::optional<double> cap = CapacityOf(c, *measure);
    const char* name = *measure == Measure::kVcDimension ? "vc_dimension"
                                                         : "log_hypothesis_count";
    if (!cap.has_value()) {
      v->push_back({prefix + ".capacity",
                    absl::StrCat("the chosen family needs capacity.", name)});
      continue;
    }
    if (!CheckNonNegativeFinite(absl::StrCat(prefix, ".capacity.", name), *cap, v)) {
      continue;
    }
    if (previous.has_value() && *cap < *previous) {
      v->push_back({absl::StrCat(prefix, ".capacity.", name),
                    absl::StrFormat("capacity %g is smaller than the previous candidate's "
                                    "%g: a structure must be nested, so list the "
                                    "candidates by non-decreasing capacity",
                                    *cap, *previous)});
    }
    previous = *cap;
  }
}

void CheckWeights(const SelectRequest& request, std::vector<FieldViolation>* v) {
  if (request.spread != DeltaSpread::kCallerWeights) {
    if (!request.weights.empty()) {
      v->push_back({"weights", "weights go with the caller-weights spread"});
    }
    if (request.spread != DeltaSpread::kUniform &&
        request.spread != DeltaSpread::kInverseSquare) {
      v->push_back({"spread", "unknown delta spread"});
    }
    return;
  }
  if (request.weights.size() != request.candidates.size()) {
    v->push_back({"weights", absl::StrCat("give one weight per candidate: ",
                                          request.candidates.size(), " candidates, ",
                                          request.weights.size(), " weights")});
    return;
  }
  double sum = 0.0;
  for (std::size_t i = 0; i < request.weights.size(); ++i) {
    const double w = request.weights[i];
    if (!std::isfinite(w) || w <= 0.0 || w > 1.0) {
      v->push_back({absl::StrCat("weights[", i, "]"), "must be a weight in (0, 1]"});
    }
    sum += w;
  }
  if (sum > 1.0 + kWeightSumSlack) {
    v->push_back({"weights", absl::StrFormat("weights must sum to at most 1, got %.12g",
                                             sum)});
  }
}

std::string DeltaRule(const SelectRequest& request, double total) {
  const std::size_t k = request.candidates.size();
  switch (request.spread) {
    case DeltaSpread::kUniform:
      return absl::StrFormat(
          "union bound over %d candidates: each bound at delta/%d = %g; the chosen "
          "bound holds with probability >= 1 - %g",
          k, k, request.failure_probability / static_cast<double>(k), total);
    case DeltaSpread::kInverseSquare:
      return absl::StrFormat(
          "union bound with weights w_k = 6/(pi^2 k^2) (k = position, from 1): "
          "candidate k's bound at delta * w_k; the weights of all k sum to 1, so "
          "candidates may be appended later; the chosen bound holds with probability "
          ">= 1 - %g",
          total);
    case DeltaSpread::kCallerWeights:
      break;
  }
  return absl::StrFormat(
      "union bound with the caller's weights: candidate k's bound at delta * w_k; the "
      "chosen bound holds with probability >= 1 - %g",
      total);
}

}  // namespace

absl::StatusOr<SelectResult> SelectStructure(const SelectRequest& request,
                                             const StopToken& stop) {
  if (stop.StopRequested()) return stop.Status();
  std::vector<FieldViolation> violations;
  CheckProbabilityOpen("failure_probability", request.failure_probability, &violations);
  CheckNonNegativeFinite("fragility_tolerance", request.fragility_tolerance, &violations);
  const FamilySpec* spec = FindFamily(request.family);
  std::optional<Measure> measure;
  if (spec == nullptr) {
    violations.push_back({"family", "unknown bound family"});
  } else {
    measure = MeasureOf(*spec);
    if (!measure.has_value()) {
      violations.push_back(
          {"family", absl::StrCat(spec->slug,
                                  " is not a training-set family; selection along a "
                                  "structure needs a bound uniform over each class "
                                  "(vc-additive, vc-relative, occam-hoeffding, occam-kl)")});
    }
  }
  CheckCandidates(request, measure, &violations);
  CheckWeights(request, &violations);
  if (!violations.empty()) return InvalidFields(violations);
  if (stop.StopRequested()) return stop.Status();

  const std::vector<double> weights = Weights(request);
  SelectResult result;
  result.candidates.reserve(request.candidates.size());
  for (std::size_t i = 0; i < request.candidates.size(); ++i) {
    if (i % kStopCheckEvery == 0 && stop.StopRequested()) return stop.Status();
    const Candidate& c = request.candidates[i];
    Evidence evidence;
    evidence.training = TrainingEvidence{c.training, c.capacity};
    const double delta_i = request.failure_probability * weights[i];
    const Certificate cert = spec->compute(evidence, delta_i);
    CandidateResult row;
    row.id = c.id;
    row.capacity = *CapacityOf(c, *measure);
    row.empirical_risk = cert.empirical_risk;
    row.penalty = cert.penalty;
    row.risk_upper_bound = cert.risk_upper_bound;
    row.failure_probability = delta_i;
    row.vacuous = cert.vacuous;
    row.delta_weight = weights[i];
    row.exact = cert.exact;
    row.notes = cert.notes;
    result.spent_failure_probability += delta_i;
    result.candidates.push_back(std::move(row));
  }
  const auto& rows = result.candidates;
  for (std::size_t i = 1; i < rows.size(); ++i) {
    if (rows[i].risk_upper_bound < rows[result.chosen_index].risk_upper_bound) {
      result.chosen_index = i;
    }
  }
  const double best = rows[result.chosen_index].risk_upper_bound;
  for (std::size_t i = 0; i < rows.size(); ++i) {
    if (i != result.chosen_index &&
        rows[i].risk_upper_bound - best <= request.fragility_tolerance) {
      result.within_tolerance.push_back(i);
    }
  }
  if (stop.StopRequested()) return stop.Status();
  result.fragile = !result.within_tolerance.empty();
  result.delta_rule = DeltaRule(request, result.spent_failure_probability);
  if (rows[result.chosen_index].vacuous) {
    result.notes.emplace_back(
        "every candidate's bound is vacuous (>= 1): the structure says nothing about "
        "the true error; the choice is arbitrary");
  } else if (result.fragile) {
    result.notes.push_back(absl::StrFormat(
        "%d other candidate(s) are within %g of the chosen bound: the data do not "
        "clearly separate them",
        result.within_tolerance.size(), request.fragility_tolerance));
  }
  return result;
}

}  // namespace riskbound::core
