#include "service/core/select.h"

#include <cmath>
#include <optional>
#include <set>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "absl/strings/str_join.h"
#include "service/core/certify.h"
#include "service/core/delta_split.h"
#include "service/core/families.h"
#include "service/core/field_violation.h"
#include "service/core/vc.h"

namespace riskbound::core {
namespace {

// Candidates computed between two looks at the StopToken (each costs a few
// microseconds at most).
constexpr std::size_t kStopCheckEvery = 16;

// The candidate's capacity in the family's measure, or nullopt when missing.
std::optional<double> CapacityOf(const StructureCandidate& c, CapacityMeasure measure) {
  if (measure == CapacityMeasure::kVcDimension) {
    if (!c.capacity.vc_dimension.has_value()) return std::nullopt;
    return static_cast<double>(*c.capacity.vc_dimension);
  }
  return c.capacity.log_hypothesis_count;
}

// The weights w_k, each rounded down so that their exact sum is <= 1
// (delta_split.h): the uniform 1/K and 6/(pi^2 k^2) are not doubles.
std::vector<double> Weights(const SelectRequest& request, DeltaSpread spread) {
  const std::size_t k = request.structure.size();
  std::vector<double> w(k);
  for (std::size_t i = 0; i < k; ++i) {
    switch (spread) {
      case DeltaSpread::kUniform:
        w[i] = EqualShare(1.0, k);
        break;
      case DeltaSpread::kInverseSquare:
        w[i] = InverseSquareWeight(i + 1);
        break;
      case DeltaSpread::kCallerWeights:
        w[i] = request.weights[i];
        break;
    }
  }
  return w;
}

// delta_k, rounded toward zero so that the shares' exact sum is <= delta.
double Share(const SelectRequest& request, DeltaSpread spread, double weight) {
  if (spread == DeltaSpread::kUniform) {
    return EqualShare(request.failure_probability, request.structure.size());
  }
  return WeightedShare(request.failure_probability, weight);
}

// The families whose formula takes a VC dimension: the only ones heuristic
// mode can evaluate with a fitted effective VC dimension.
bool IsVcFamily(Family f) { return f == Family::kVcAdditive || f == Family::kVcRelative; }

bool CapacityGiven(const ClassCapacity& c) {
  return c.vc_dimension.has_value() || c.hypothesis_count.has_value() ||
         c.log_hypothesis_count.has_value() || c.model.has_value();
}

// Heuristic mode: each candidate carries a fitted effective VC dimension and
// no capacity.
void CheckHeuristicCandidate(const StructureCandidate& c, const std::string& prefix,
                             std::vector<FieldViolation>* v) {
  if (CapacityGiven(c.capacity)) {
    v->push_back({prefix + ".capacity",
                  "heuristic mode ranks each class by its effective_vc_dimension alone: leave "
                  "capacity unset (a known capacity belongs in a certified selection, without "
                  "heuristic)"});
  }
  const std::string path = prefix + ".effective_vc_dimension";
  if (!c.effective_vc_dimension.has_value()) {
    v->push_back({path,
                  "required in heuristic mode: the class's fitted h_hat "
                  "(FitEffectiveVcDimension, riskbound effective-vc)"});
  } else if (!std::isfinite(*c.effective_vc_dimension) || *c.effective_vc_dimension <= 0.0) {
    v->push_back({path, absl::StrFormat("must be a finite effective VC dimension > 0, not %g",
                                        *c.effective_vc_dimension)});
  }
}

// Checks every candidate and resolves its capacity in `structure` (a copy of
// the request's). `measure` is kNone when the family is unknown (then the
// capacities are resolved but not judged against it). In heuristic mode the
// candidates carry effective VC dimensions instead of capacities.
void CheckCandidates(std::vector<StructureCandidate>* structure, CapacityMeasure measure,
                     bool heuristic, std::vector<FieldViolation>* v) {
  if (structure->empty()) {
    v->push_back({"structure", "give at least one candidate class"});
    return;
  }
  std::set<std::string> ids;
  std::optional<double> previous;  // capacity of the previous well-formed candidate
  for (std::size_t i = 0; i < structure->size(); ++i) {
    StructureCandidate& c = (*structure)[i];
    const std::string prefix = absl::StrCat("structure[", i, "]");
    if (c.id.empty()) {
      v->push_back({prefix + ".id", "give each candidate a non-empty id"});
    } else if (!ids.insert(c.id).second) {
      v->push_back({prefix + ".id", absl::StrCat("id \"", c.id, "\" is used twice")});
    }
    if (heuristic) {
      CheckSampleCounts(prefix, c, v);
      CheckHeuristicCandidate(c, prefix, v);
      continue;
    }
    if (c.effective_vc_dimension.has_value()) {
      v->push_back({prefix + ".effective_vc_dimension",
                    "a fitted effective VC dimension is a heuristic estimate, not a capacity a "
                    "bound may use: give capacity for a certified selection, or set heuristic "
                    "to rank by it (the answer is then not a certificate)"});
    }
    const std::string capacity_path = prefix + ".capacity";
    const bool resolved = ResolveCapacity(&c.capacity, capacity_path, v);
    CheckSampleCounts(prefix, c, v);
    if (!resolved || measure == CapacityMeasure::kNone) continue;
    const std::optional<double> cap = CapacityOf(c, measure);
    const std::string name(CapacityMeasureName(measure));
    if (!cap.has_value()) {
      v->push_back({capacity_path, absl::StrCat("the chosen family needs capacity.", name,
                                                measure == CapacityMeasure::kVcDimension
                                                    ? " (or a model of finite VC dimension)"
                                                    : " or hypothesis_count (or a finite "
                                                      "class model)")});
      continue;
    }
    if (previous.has_value() && *cap < *previous) {
      v->push_back({absl::StrCat(capacity_path, ".", name),
                    absl::StrFormat("capacity %g is smaller than the previous candidate's "
                                    "%g: a structure must be nested, so list the "
                                    "candidates by non-decreasing capacity",
                                    *cap, *previous)});
    }
    previous = *cap;
  }
}

void CheckWeights(const SelectRequest& request, DeltaSpread spread,
                  std::vector<FieldViolation>* v) {
  if (spread != DeltaSpread::kCallerWeights) {
    if (!request.weights.empty()) {
      v->push_back({"weights", "weights go with the caller-weights spread"});
    }
    if (spread != DeltaSpread::kUniform && spread != DeltaSpread::kInverseSquare) {
      v->push_back({"delta_spread", "unknown delta spread"});
    }
    return;
  }
  if (request.weights.size() != request.structure.size()) {
    v->push_back(
        {"weights", absl::StrCat("give one weight per candidate: ", request.structure.size(),
                                 " candidates, ", request.weights.size(), " weights")});
    return;
  }
  bool each_ok = true;
  std::vector<double> usable;  // the finite, non-negative ones, for the sum
  for (std::size_t i = 0; i < request.weights.size(); ++i) {
    const double w = request.weights[i];
    if (!std::isfinite(w) || w <= 0.0 || w > 1.0) {
      v->push_back({absl::StrCat("weights[", i, "]"), "must be a weight in (0, 1]"});
      each_ok = false;
    }
    if (std::isfinite(w) && w >= 0.0) usable.push_back(w);
  }
  // Exactly, not in rounded double arithmetic: [0.5, 0.5000000000000001]
  // sums to more than 1 and would overspend the failure probability.
  if (!WeightsSumAtMostOne(usable)) {
    v->push_back({"weights", WeightSumMessage(usable, each_ok ? "weights" : "")});
  }
}

std::string DeltaRule(const SelectRequest& request, DeltaSpread spread, double total) {
  const std::size_t k = request.structure.size();
  switch (spread) {
    case DeltaSpread::kUniform:
      return absl::StrFormat(
          "union bound over %d candidates: each bound at delta/%d (rounded down, at most %s); "
          "the chosen bound holds with probability >= 1 - %s",
          k, k, FailureProbabilityText(EqualShare(request.failure_probability, k)),
          FailureProbabilityText(total));
    case DeltaSpread::kInverseSquare:
      return absl::StrFormat(
          "union bound with weights w_k = 6/(pi^2 k^2) (k = position, from 1): "
          "candidate k's bound at delta * w_k (rounded down); the weights of all k sum to 1, "
          "so candidates may be appended later; the chosen bound holds with probability "
          ">= 1 - %s",
          FailureProbabilityText(total));
    case DeltaSpread::kCallerWeights:
      break;
  }
  return absl::StrFormat(
      "union bound with the caller's weights: candidate k's bound at delta * w_k (rounded "
      "down); the chosen bound holds with probability >= 1 - %s",
      FailureProbabilityText(total));
}

// Heuristic mode's account of delta: the shares only fix where the formula
// is evaluated; no union bound is claimed.
std::string HeuristicDeltaRule(const SelectRequest& request, DeltaSpread spread) {
  std::string where = "delta * w_k with the caller's weights";
  if (spread == DeltaSpread::kUniform) {
    where = absl::StrCat("delta/", request.structure.size());
  } else if (spread == DeltaSpread::kInverseSquare) {
    where = "delta * 6/(pi^2 k^2) (k = position, from 1)";
  }
  return absl::StrCat("heuristic mode: candidate k's score is the VC formula at ", where,
                      " (rounded down), as in a certified selection; with fitted effective VC "
                      "dimensions no union bound is claimed and nothing holds with any stated "
                      "probability");
}

// A request after its checks: the structure with resolved capacities, the
// family, its measure and the spread.
struct Checked {
  std::vector<StructureCandidate> structure;
  const FamilySpec* spec = nullptr;
  DeltaSpread spread = kDefaultDeltaSpread;
  double fragility_tolerance = kDefaultFragilityTolerance;
};

// Appends every violation of `request` to `v`; the result is usable only
// when it appended none.
Checked Check(const SelectRequest& request, std::vector<FieldViolation>* v) {
  Checked out;
  out.structure = request.structure;
  out.spread = request.delta_spread.value_or(kDefaultDeltaSpread);
  out.fragility_tolerance = request.fragility_tolerance.value_or(kDefaultFragilityTolerance);
  CheckProbabilityOpen("failure_probability", request.failure_probability, v);
  CheckNonNegativeFinite("fragility_tolerance", out.fragility_tolerance, v);
  out.spec = request.family.has_value() ? FindFamily(*request.family) : nullptr;
  CapacityMeasure measure = CapacityMeasure::kNone;
  if (request.heuristic && (out.spec == nullptr || !IsVcFamily(out.spec->family))) {
    v->push_back({"family",
                  "heuristic mode evaluates the VC formula with each class's fitted "
                  "effective VC dimension: give a VC family (vc-additive, "
                  "vc-relative)"});
  } else if (out.spec == nullptr) {
    v->push_back({"family", absl::StrCat("required: a training-set family (", TrainingFamilyNames(),
                                         "); unset, or a value this server does not know")});
  } else if (out.spec->capacity_measure == CapacityMeasure::kNone) {
    v->push_back({"family", absl::StrCat(out.spec->family_name,
                                         " is not a training-set family; selection along a "
                                         "structure needs a bound uniform over each class (",
                                         TrainingFamilyNames(), ")")});
  } else {
    measure = out.spec->capacity_measure;
  }
  CheckCandidates(&out.structure, measure, request.heuristic, v);
  CheckWeights(request, out.spread, v);
  return out;
}

}  // namespace

absl::Status ValidateSelectRequest(const SelectRequest& request) {
  std::vector<FieldViolation> violations;
  Check(request, &violations);
  return InvalidFields(violations);
}

absl::StatusOr<SelectResult> SelectStructure(const SelectRequest& request,
                                             const StopToken& stop) {
  if (stop.StopRequested()) return stop.Status();
  std::vector<FieldViolation> violations;
  const Checked checked = Check(request, &violations);
  if (!violations.empty()) return InvalidFields(violations);
  if (stop.StopRequested()) return stop.Status();

  const FamilySpec* spec = checked.spec;
  const CapacityMeasure measure = spec->capacity_measure;
  const bool heuristic = request.heuristic;
  const std::vector<double> weights = Weights(request, checked.spread);
  SelectResult result;
  result.family = spec->family;
  result.heuristic = heuristic;
  result.capacity_measure =
      heuristic ? "effective_vc_dimension" : std::string(CapacityMeasureName(measure));
  result.delta_spread = checked.spread;
  result.fragility_tolerance = checked.fragility_tolerance;
  result.requested_failure_probability = request.failure_probability;
  result.candidates.reserve(checked.structure.size());
  for (std::size_t i = 0; i < checked.structure.size(); ++i) {
    if (i % kStopCheckEvery == 0 && stop.StopRequested()) return stop.Status();
    const StructureCandidate& c = checked.structure[i];
    const double delta_i = Share(request, checked.spread, weights[i]);
    Certificate cert;
    CandidateBound row;
    if (heuristic) {
      // The VC formula with h_hat: a score, never a bound (select.h).
      row.capacity = *c.effective_vc_dimension;
      cert = spec->family == Family::kVcRelative ? VcRelativeAtReal(c, row.capacity, delta_i)
                                                 : VcAdditiveAtReal(c, row.capacity, delta_i);
    } else {
      Evidence evidence;
      evidence.training = TrainingEvidence{c, c.capacity};
      cert = spec->compute(evidence, delta_i);
      row.capacity = *CapacityOf(c, measure);
    }
    row.id = c.id;
    row.empirical_risk = cert.empirical_risk;
    row.penalty = cert.penalty;
    row.risk_upper_bound = cert.risk_upper_bound;
    row.failure_probability = delta_i;
    row.vacuous = cert.vacuous;
    row.delta_weight = weights[i];
    row.exact = cert.exact;
    row.notes = cert.notes;
    row.notes.insert(row.notes.end(), c.capacity.notes.begin(), c.capacity.notes.end());
    if (heuristic) {
      row.notes.push_back(absl::StrFormat(
          "heuristic score, not a bound: the %s formula with the fitted effective VC "
          "dimension h_hat = %g in place of a VC dimension",
          spec->family_name, row.capacity));
    }
    result.candidates.push_back(std::move(row));
  }
  const auto& rows = result.candidates;
  for (std::size_t i = 1; i < rows.size(); ++i) {
    if (rows[i].risk_upper_bound < rows[result.chosen_index].risk_upper_bound) {
      result.chosen_index = i;
    }
  }
  result.chosen_id = rows[result.chosen_index].id;
  const double best = rows[result.chosen_index].risk_upper_bound;
  for (std::size_t i = 0; i < rows.size(); ++i) {
    if (i != result.chosen_index &&
        rows[i].risk_upper_bound - best <= checked.fragility_tolerance) {
      result.within_tolerance_ids.push_back(rows[i].id);
    }
  }
  if (stop.StopRequested()) return stop.Status();
  result.fragile = !result.within_tolerance_ids.empty();
  std::vector<double> shares;
  shares.reserve(rows.size());
  for (const CandidateBound& row : rows) shares.push_back(row.failure_probability);
  result.spent_failure_probability = SpentOf(shares);
  result.delta_rule = heuristic
                          ? HeuristicDeltaRule(request, checked.spread)
                          : DeltaRule(request, checked.spread, result.spent_failure_probability);
  if (heuristic) {
    result.notes.push_back(absl::StrFormat(
        "HEURISTIC, NOT A BOUND: the candidates are ranked by the %s formula with each "
        "class's fitted effective VC dimension (Vapnik, Levin & LeCun 1994) in place of its VC "
        "dimension. h_hat is an estimate (the fitted curve is an upper-bound shape used as an "
        "equality, calibrated on linear classifiers), so no score here bounds a true error. Use "
        "the ranking to compare classes or to plan; never as a certificate: no gate verdict or "
        "certificate takes an effective VC dimension",
        spec->family_name));
    for (std::size_t i = 1; i < checked.structure.size(); ++i) {
      const double before = *checked.structure[i - 1].effective_vc_dimension;
      const double here = *checked.structure[i].effective_vc_dimension;
      if (here < before) {
        result.notes.push_back(absl::StrFormat(
            "structure[%d].effective_vc_dimension %g is below the previous class's %g although "
            "the classes are nested: the fits are noisy (see their bootstrap intervals)",
            i, here, before));
      }
    }
  }
  const char* what = heuristic ? "score" : "bound";
  if (rows[result.chosen_index].vacuous) {
    result.notes.push_back(absl::StrFormat(
        "every candidate's %s is vacuous (>= 1): the structure says nothing about the true "
        "error; the choice is arbitrary",
        what));
  } else if (result.fragile) {
    result.notes.push_back(absl::StrFormat(
        "%d other candidate(s) are within %g of the chosen %s: the data do not clearly "
        "separate them",
        result.within_tolerance_ids.size(), checked.fragility_tolerance, what));
  }
  return result;
}

}  // namespace riskbound::core
