// Structural risk minimization (SRM): choosing a model along a nested
// structure of classes by the smallest guaranteed bound.
//
// Setting: classes H_1 ⊂ H_2 ⊂ ... of growing capacity, fixed (with their
// failure-probability weights) before the training sample was seen; in each
// class a model was fitted on the training sample and its training errors
// counted. Every candidate's bound is a training-set bound (uniform over its
// class) computed at its share delta_k = delta * w_k of the failure
// probability. By the union bound all of them hold together with probability
// >= 1 - sum_k delta_k >= 1 - delta, so the smallest of them is a valid bound
// on the chosen model's true error.
// Source: Vapnik (1995, 1998), the SRM principle (chapter numbers from
// memory); Shalev-Shwartz & Ben-David (2014) ch. 7 (SRM with weights w_k,
// Theorem 7.4 from memory); weights
// 6/(pi^2 k^2) from sum_k 1/k^2 = pi^2/6 (Euler's Basel sum).
//
// Heuristic mode (SelectRequest::heuristic): the same VC formula evaluated
// with each class's FITTED effective VC dimension h_hat (effective_vc.h;
// Vapnik, Levin & LeCun 1994) in place of its VC dimension. h_hat is an
// estimate, not a capacity (the fitted curve is an upper-bound shape used as
// an equality), so the scores are no bounds and the union bound protects
// nothing: the result is marked heuristic and says so in its first note. It
// ranks classes; it is never a certificate, and nothing that builds a
// certificate or a gate verdict reads an effective VC dimension.
#ifndef RISKBOUND_SERVICE_CORE_SELECT_H_
#define RISKBOUND_SERVICE_CORE_SELECT_H_

#include <cstddef>
#include <optional>
#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "service/core/evidence.h"
#include "service/core/stop.h"

namespace riskbound::core {

// One class of the structure and the model fitted in it. API:
// StructureCandidate: its training counts (error_count, sample_count), id and
// capacity.
struct StructureCandidate : SampleCounts {
  // Caller's name for the candidate; non-empty and unique in the request.
  std::string id;
  // Capacity of the class: vc_dimension for the VC families,
  // log_hypothesis_count (or hypothesis_count) for the finite-class (Occam)
  // families, or a model description (resolved with ResolveCapacity).
  // Heuristic mode: must be empty.
  ClassCapacity capacity;
  // HEURISTIC ONLY: the class's fitted effective VC dimension h_hat. Allowed
  // only in heuristic mode, and then required: finite and > 0.
  std::optional<double> effective_vc_dimension;
};

// How the failure probability delta is spread over the candidates. API:
// DeltaSpread.
enum class DeltaSpread {
  // w_k = 1/K for K candidates.
  kUniform = 1,
  // w_k = 6/(pi^2 k^2), k = 1-based position: the weights of a structure that
  // may keep growing (they sum to 1 over all k, so candidates can be appended
  // later without changing the earlier weights).
  kInverseSquare = 2,
  // SelectRequest::weights, one per candidate.
  kCallerWeights = 3,
};

// The spread used when the request leaves it unset.
inline constexpr DeltaSpread kDefaultDeltaSpread = DeltaSpread::kInverseSquare;
// The fragility tolerance used when the request leaves it unset.
inline constexpr double kDefaultFragilityTolerance = 0.01;

// API: SelectStructureRequest; every field path SelectStructure reports is
// its API path ("structure[3].capacity.vc_dimension", "delta_spread").
struct SelectRequest {
  // The structure, ordered by growing (non-decreasing) capacity.
  std::vector<StructureCandidate> structure;
  // A training-set family: kVcAdditive, kVcRelative, kOccamHoeffding,
  // kOccamKl (any registered family with a capacity measure). Required:
  // nullopt (unset, or a value this server does not know) is refused.
  std::optional<Family> family;
  // Failure probability of the selected bound, in (0, 1).
  double failure_probability = 0.05;
  // nullopt: kDefaultDeltaSpread.
  std::optional<DeltaSpread> delta_spread;
  // kCallerWeights only: one weight per candidate, each in (0, 1], sum <= 1.
  std::vector<double> weights;
  // Absolute distance on the bound within which another candidate counts as
  // a near tie (the choice is then "fragile"). Finite, >= 0. nullopt:
  // kDefaultFragilityTolerance.
  std::optional<double> fragility_tolerance;
  // Heuristic mode: rank by structure[i].effective_vc_dimension with the VC
  // family's formula (family kVcAdditive or kVcRelative). The result is a
  // heuristic ranking, not a certificate.
  bool heuristic = false;
};

// One candidate's bound. API: CandidateBound.
struct CandidateBound {
  std::string id;
  // The capacity the family used (h, or ln |H|).
  double capacity = 0.0;
  double empirical_risk = 0.0;
  // risk_upper_bound - empirical_risk.
  double penalty = 0.0;
  // The candidate's bound at failure_probability (below), clipped to [0, 1].
  // Heuristic mode: the formula's value with h_hat, a score and NOT a bound.
  double risk_upper_bound = 1.0;
  // The request's failure probability * delta_weight: spent on this candidate.
  double failure_probability = 0.0;
  // True when the bound says nothing (>= 1).
  bool vacuous = true;
  // The weight w_k.
  double delta_weight = 0.0;
  // False when a conservative relaxation stood in for an exact computation.
  bool exact = true;
  // The family's remarks on this candidate, then where its capacity came
  // from (ClassCapacity::notes).
  std::vector<std::string> notes;
};

// API: SelectStructureResponse (cautions and engine version are the
// caller's).
struct SelectResult {
  // One row per candidate, in request order.
  std::vector<CandidateBound> candidates;
  // The candidate with the smallest bound; ties go to the earlier
  // (smaller-capacity) candidate.
  std::string chosen_id;
  std::size_t chosen_index = 0;
  // True when some other candidate's bound is within fragility_tolerance of
  // the chosen one: the data do not clearly separate them.
  bool fragile = false;
  // Ids of those candidates, in request order (chosen excluded).
  std::vector<std::string> within_tolerance_ids;
  // The tolerance used.
  double fragility_tolerance = kDefaultFragilityTolerance;
  // How delta was spread, in plain words.
  std::string delta_rule;
  // sum_k delta_k: the chosen bound holds with probability
  // >= 1 - spent_failure_probability.
  double spent_failure_probability = 0.0;
  // The family used.
  Family family = Family::kVcAdditive;
  // What `capacity` means: "vc_dimension", "log_hypothesis_count", or in
  // heuristic mode "effective_vc_dimension".
  std::string capacity_measure;
  // Plain-words remarks (every bound vacuous, near ties, ...).
  std::vector<std::string> notes;
  // The spread used.
  DeltaSpread delta_spread = kDefaultDeltaSpread;
  // The request's failure_probability.
  double requested_failure_probability = 0.0;
  // Heuristic mode: ranked by fitted effective VC dimensions. No
  // risk_upper_bound is a bound and spent_failure_probability guarantees
  // nothing; the first note says so.
  bool heuristic = false;
};

// ValidateSelectRequest
// Returns OK, or INVALID_ARGUMENT naming every bad field of `request` at once
// (the checks of SelectStructure, without computing any bound).
absl::Status ValidateSelectRequest(const SelectRequest& request);

// SelectStructure
// Computes every candidate's bound with the registered family (so a
// candidate's bound equals a Certify call with that family at delta_k) and
// selects the smallest.
// Errors: INVALID_ARGUMENT naming every bad field at once by its API path:
// structure (empty), structure[i].id (empty or duplicated),
// structure[i].capacity (missing, more than one measure, not the measure the
// family uses), structure[i].capacity.<measure> (bad, or smaller than the
// previous candidate's: a structure must be nested), structure[i].capacity.model...
// (a model description the catalogue refuses), structure[i].sample_count
// (0 or > 2^53), structure[i].error_count (> sample_count), family (unset,
// unknown, or not a training-set family), weights / weights[i] (wrong size,
// outside (0, 1], sum above 1, or given without kCallerWeights),
// failure_probability (outside (0, 1)), fragility_tolerance (not finite, < 0),
// structure[i].effective_vc_dimension (given without heuristic; in heuristic
// mode missing, not finite or <= 0), structure[i].capacity (given in
// heuristic mode), family (in heuristic mode, not a VC family).
// Never returns NaN or Inf.
// Cost: linear in the number of candidates (a bounded amount per candidate);
// `stop` is checked every few candidates, and a stopped call returns
// stop.Status() (CANCELLED or DEADLINE_EXCEEDED), never a partial result.
// Heuristic mode: every candidate's row is the VC formula at its share with
// h = h_hat (equal to a Certify call with vc_dimension = h_hat when h_hat is
// an integer), result.heuristic is true, capacity_measure is
// "effective_vc_dimension", and the notes start "HEURISTIC, NOT A BOUND"; a
// decrease of h_hat along the structure is noted, not refused.
// REQUIRES: the candidates, their order, the family and the weights were
// fixed before the training sample was seen.
// Thread-safe; no shared state.
absl::StatusOr<SelectResult> SelectStructure(const SelectRequest& request,
                                             const StopToken& stop = StopToken::Never());

}  // namespace riskbound::core

#endif  // RISKBOUND_SERVICE_CORE_SELECT_H_
