#include "service/core/families.h"

#include <array>

#include "service/core/finite_class.h"
#include "service/core/holdout.h"
#include "service/core/vc.h"

namespace riskbound::core {
namespace {

bool HasHoldout(const Evidence& e) { return e.holdout.has_value(); }
bool HasVc(const Evidence& e) {
  return e.training.has_value() && e.training->capacity.vc_dimension.has_value();
}
bool HasFiniteClass(const Evidence& e) {
  return e.training.has_value() && e.training->capacity.log_hypothesis_count.has_value();
}

constexpr char kHoldoutAssumptions[] =
    "hold-out examples drawn i.i.d. from the deployment distribution after the "
    "model (and every threshold) was fixed; 0-1 loss";
constexpr char kTrainingAssumptions[] =
    "training examples drawn i.i.d. from the deployment distribution; the class "
    "(and its capacity) fixed before the sample was seen; 0-1 loss; uniform over "
    "the class, so valid for a model chosen on the same data";

const std::array<FamilySpec, 7> kFamilies = {{
    {Family::kHoldoutExactBinomial, "holdout-binomial",
     "Exact binomial tail inversion (one-sided Clopper-Pearson) on a hold-out set",
     "Clopper & Pearson (1934); Langford (2005), test-set bound", kHoldoutAssumptions,
     "evidence.holdout", HasHoldout,
     [](const Evidence& e, double d) { return HoldoutExactBinomial(*e.holdout, d); }},
    {Family::kHoldoutHoeffding, "holdout-hoeffding", "Hoeffding bound on a hold-out set",
     "Hoeffding (1963), Theorem 1", kHoldoutAssumptions, "evidence.holdout", HasHoldout,
     [](const Evidence& e, double d) { return HoldoutHoeffding(*e.holdout, d); }},
    {Family::kHoldoutKlChernoff, "holdout-kl",
     "kl-Chernoff bound (binary KL inverse) on a hold-out set",
     "Chernoff (1952); Langford (2005)", kHoldoutAssumptions, "evidence.holdout",
     HasHoldout,
     [](const Evidence& e, double d) { return HoldoutKlChernoff(*e.holdout, d); }},
    {Family::kVcAdditive, "vc-additive",
     "Vapnik's additive VC bound on the training error",
     "Vapnik (1995), ch. 3; Vapnik (1998), ch. 4; Burges (1998), eq. 3",
     kTrainingAssumptions, "evidence.training with capacity.vc_dimension", HasVc,
     [](const Evidence& e, double d) {
       return VcAdditive(e.training->counts, *e.training->capacity.vc_dimension, d);
     }},
    {Family::kVcRelative, "vc-relative",
     "Vapnik's relative-deviation VC bound on the training error",
     "Vapnik (1998), ch. 4; Anthony & Shawe-Taylor (1993)", kTrainingAssumptions,
     "evidence.training with capacity.vc_dimension", HasVc,
     [](const Evidence& e, double d) {
       return VcRelative(e.training->counts, *e.training->capacity.vc_dimension, d);
     }},
    {Family::kOccamHoeffding, "occam-hoeffding",
     "Occam bound for a finite class, Hoeffding form",
     "Hoeffding (1963) with a union bound; Blumer, Ehrenfeucht, Haussler & Warmuth (1987)",
     kTrainingAssumptions,
     "evidence.training with capacity.hypothesis_count or capacity.log_hypothesis_count",
     HasFiniteClass,
     [](const Evidence& e, double d) {
       return OccamHoeffding(e.training->counts,
                             *e.training->capacity.log_hypothesis_count, d);
     }},
    {Family::kOccamKl, "occam-kl", "Occam bound for a finite class, kl (Chernoff) form",
     "Langford (2005), Occam's razor bound", kTrainingAssumptions,
     "evidence.training with capacity.hypothesis_count or capacity.log_hypothesis_count",
     HasFiniteClass,
     [](const Evidence& e, double d) {
       return OccamKl(e.training->counts, *e.training->capacity.log_hypothesis_count, d);
     }},
}};

}  // namespace

absl::Span<const FamilySpec> Families() { return kFamilies; }

const FamilySpec* FindFamily(Family family) {
  for (const FamilySpec& spec : kFamilies) {
    if (spec.family == family) return &spec;
  }
  return nullptr;
}

const FamilySpec* FindFamilyBySlug(absl::string_view slug) {
  for (const FamilySpec& spec : kFamilies) {
    if (spec.slug == slug) return &spec;
  }
  return nullptr;
}

}  // namespace riskbound::core
