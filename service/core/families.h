// The registry of bound families: one row per family.
//
// Adding a family: write its pure function (holdout.h, vc.h, ...), add a value
// to Family (evidence.h) and to the proto enum, and register one row in
// families.cc. Certify, the RPC layer and the CLI pick it up from here.
#ifndef RISKBOUND_SERVICE_CORE_FAMILIES_H_
#define RISKBOUND_SERVICE_CORE_FAMILIES_H_

#include "absl/strings/string_view.h"

#include "absl/types/span.h"
#include "service/core/evidence.h"

namespace riskbound::core {

struct FamilySpec {
  Family family;
  // Stable lower-case name used by the CLI and in docs ("holdout-binomial").
  absl::string_view slug;
  // One line for people.
  absl::string_view title;
  // The published source of the bound.
  absl::string_view source;
  // What must hold for the bound to be valid.
  absl::string_view assumptions;
  // The evidence the family needs, in API field-path words.
  absl::string_view needs;
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

// FindFamilyBySlug
// Returns the registry row whose slug is `slug`, or nullptr.
const FamilySpec* FindFamilyBySlug(absl::string_view slug);

}  // namespace riskbound::core

#endif  // RISKBOUND_SERVICE_CORE_FAMILIES_H_
