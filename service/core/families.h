// The registry of bound families: one row per family.
//
// Adding a family: write its pure function (holdout.h, vc.h, ...), add a value
// to Family (evidence.h) and to the proto enum, and register one row in
// families.cc. Certify, the RPC layer and the CLI pick it up from here.
#ifndef RISKBOUND_SERVICE_CORE_FAMILIES_H_
#define RISKBOUND_SERVICE_CORE_FAMILIES_H_

#include <string>

#include "absl/strings/string_view.h"
#include "absl/types/span.h"
#include "service/core/evidence.h"

namespace riskbound::core {

// The capacity measure a training-set family reads from
// evidence.training.capacity.
enum class CapacityMeasure {
  kNone,  // not a training-set family
  kVcDimension,
  kLogHypothesisCount,
};

// CapacityMeasureName
// "vc_dimension", "log_hypothesis_count", or "" for kNone: the API's names
// (SelectStructureResponse.capacity_measure).
absl::string_view CapacityMeasureName(CapacityMeasure measure);

// One registry row. API: FamilyDescription (ListFamilies) and the family
// fields of Certificate.
struct FamilySpec {
  Family family;
  // Stable lower-case name, as the CLI spells it ("holdout-binomial"); the
  // API's family_name.
  absl::string_view family_name;
  // One line for people.
  absl::string_view title;
  // The published source of the bound.
  absl::string_view source;
  // What must hold for the bound to be valid.
  absl::string_view assumptions;
  // The evidence the family needs, in API field-path words.
  absl::string_view evidence_needed;
  // The capacity measure it reads: kNone except for the training-set (VC and
  // Occam) families, the ones a structure selection or a training plan uses.
  CapacityMeasure capacity_measure;
  // True for the bounded-loss families: their certificates bound an expected
  // loss in the loss's own units (Certificate::loss_range), not an error rate.
  bool bounds_expected_loss;
  // True when the evidence holds what the family needs.
  bool (*applies)(const Evidence& evidence);
  // Computes the certificate.
  // REQUIRES: applies(evidence), ValidateEvidence(evidence).ok(), 0 < delta < 1.
  Certificate (*compute)(const Evidence& evidence, double delta);
};

// Families
// Returns every registered family, in registry order (the order ties are
// broken in and results are listed in). Never empty; static storage.
absl::Span<const FamilySpec> Families();

// FindFamily
// Returns the registry row of `family`, or nullptr for an unregistered value.
const FamilySpec* FindFamily(Family family);

// FindFamilyByName
// Returns the registry row whose family_name is `name`, or nullptr.
const FamilySpec* FindFamilyByName(absl::string_view name);

// TrainingFamilyNames
// Returns the family_name of every training-set family (those with a
// capacity_measure), in registry order, joined by ", ": the list that
// planner and selector messages name.
std::string TrainingFamilyNames();

}  // namespace riskbound::core

#endif  // RISKBOUND_SERVICE_CORE_FAMILIES_H_
