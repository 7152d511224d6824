#include "service/core/families.h"

#include <array>
#include <string>
#include <vector>

#include "absl/strings/str_join.h"

#include "service/core/anytime.h"
#include "service/core/bounded_loss.h"
#include "service/core/compression.h"
#include "service/core/finite_class.h"
#include "service/core/holdout.h"
#include "service/core/pac_bayes.h"
#include "service/core/rademacher.h"
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
bool HasBoundedLoss(const Evidence& e) { return e.bounded_loss.has_value(); }
// The empirical Bernstein bound divides by n - 1: it needs two samples.
bool HasBoundedLossTwoSamples(const Evidence& e) {
  return e.bounded_loss.has_value() && e.bounded_loss->sample_count >= 2;
}
bool HasPacBayes(const Evidence& e) { return e.pac_bayes.has_value(); }
bool HasRelabel(const Evidence& e, RelabelScheme scheme) {
  return e.relabel.has_value() && e.relabel->scheme == scheme;
}
// An averaged complexity, or raw random-sign draws (never both: validation).
bool HasRademacher(const Evidence& e) {
  return e.rademacher.has_value() || HasRelabel(e, RelabelScheme::kRandomSigns);
}
bool HasHalfFlip(const Evidence& e) { return HasRelabel(e, RelabelScheme::kHalfFlip); }
bool HasCompression(const Evidence& e) { return e.compression.has_value(); }

constexpr char kHoldoutAssumptions[] =
    "hold-out examples drawn i.i.d. from the deployment distribution after the "
    "model (and every threshold) was fixed; 0-1 loss";
constexpr char kTrainingAssumptions[] =
    "training examples drawn i.i.d. from the deployment distribution; the class "
    "(and its capacity) fixed before the sample was seen; 0-1 loss; uniform over "
    "the class, so valid for a model chosen on the same data";
constexpr char kBoundedLossAssumptions[] =
    "hold-out examples drawn i.i.d. from the deployment distribution after the "
    "model was fixed; every per-example loss inside [loss_min, loss_max], a range "
    "fixed in advance; bounds the expected loss in its own units";
constexpr char kPacBayesAssumptions[] =
    "training examples drawn i.i.d.; the prior fixed before the sample was seen "
    "(fit only on other data); loss in [0, 1]; uniform over posteriors; bounds the "
    "Gibbs classifier, or the majority vote at twice the Gibbs bound";
constexpr char kRademacherAssumptions[] =
    "training examples drawn i.i.d.; the class fixed before the sample was seen; "
    "0-1 loss; the empirical Rademacher complexity of the {-1,+1} hypothesis class "
    "in the Mohri et al. convention with an exact supremum (raw draws: every retraining "
    "reached the minimum 0-1 training error over the class); uniform over the class";
constexpr char kDiscrepancyAssumptions[] =
    "training examples drawn i.i.d.; the class fixed before the sample was seen; 0-1 "
    "loss; each flipped half of sample_count / 2 examples fixed independently of the data; "
    "every retraining reached the minimum 0-1 training error over the class on its "
    "relabelled sample; uniform over the class";
constexpr char kCompressionAssumptions[] =
    "training examples drawn i.i.d.; the reconstruction function fixed before the "
    "sample was seen and the model rebuilt from the compression set alone; 0-1 "
    "loss; errors counted only outside the compression set";

const std::array<FamilySpec, 17> kFamilies = {{
    {Family::kHoldoutExactBinomial, "holdout-binomial",
     "Exact binomial tail inversion (one-sided Clopper-Pearson) on a hold-out set",
     "Clopper & Pearson (1934); Langford (2005), test-set bound", kHoldoutAssumptions,
     "evidence.holdout", CapacityMeasure::kNone, false, HasHoldout,
     [](const Evidence& e, double d) { return HoldoutExactBinomial(*e.holdout, d); }},
    {Family::kHoldoutHoeffding, "holdout-hoeffding", "Hoeffding bound on a hold-out set",
     "Hoeffding (1963), Theorem 1", kHoldoutAssumptions, "evidence.holdout", CapacityMeasure::kNone,
     false, HasHoldout,
     [](const Evidence& e, double d) { return HoldoutHoeffding(*e.holdout, d); }},
    {Family::kHoldoutKlChernoff, "holdout-kl",
     "kl-Chernoff bound (binary KL inverse) on a hold-out set", "Chernoff (1952); Langford (2005)",
     kHoldoutAssumptions, "evidence.holdout", CapacityMeasure::kNone, false, HasHoldout,
     [](const Evidence& e, double d) { return HoldoutKlChernoff(*e.holdout, d); }},
    {Family::kVcAdditive, "vc-additive", "Vapnik's additive VC bound on the training error",
     "Vapnik (1995), ch. 3; Vapnik (1998), ch. 4; Burges (1998), eq. 3", kTrainingAssumptions,
     "evidence.training with capacity.vc_dimension", CapacityMeasure::kVcDimension, false, HasVc,
     [](const Evidence& e, double d) {
       return VcAdditive(*e.training, *e.training->capacity.vc_dimension, d);
     }},
    {Family::kVcRelative, "vc-relative",
     "Vapnik's relative-deviation VC bound on the training error",
     "Vapnik (1998), ch. 4; Anthony & Shawe-Taylor (1993)", kTrainingAssumptions,
     "evidence.training with capacity.vc_dimension", CapacityMeasure::kVcDimension, false, HasVc,
     [](const Evidence& e, double d) {
       return VcRelative(*e.training, *e.training->capacity.vc_dimension, d);
     }},
    {Family::kOccamHoeffding, "occam-hoeffding", "Occam bound for a finite class, Hoeffding form",
     "Hoeffding (1963) with a union bound; Blumer, Ehrenfeucht, Haussler & Warmuth (1987)",
     kTrainingAssumptions,
     "evidence.training with capacity.hypothesis_count or capacity.log_hypothesis_count",
     CapacityMeasure::kLogHypothesisCount, false, HasFiniteClass,
     [](const Evidence& e, double d) {
       return OccamHoeffding(*e.training, *e.training->capacity.log_hypothesis_count, d);
     }},
    {Family::kOccamKl, "occam-kl", "Occam bound for a finite class, kl (Chernoff) form",
     "Langford (2005), Occam's razor bound", kTrainingAssumptions,
     "evidence.training with capacity.hypothesis_count or capacity.log_hypothesis_count",
     CapacityMeasure::kLogHypothesisCount, false, HasFiniteClass,
     [](const Evidence& e, double d) {
       return OccamKl(*e.training, *e.training->capacity.log_hypothesis_count, d);
     }},
    {Family::kBoundedHoeffding, "bounded-hoeffding",
     "Hoeffding bound on the mean of a bounded loss on a hold-out set",
     "Hoeffding (1963), Theorem 2", kBoundedLossAssumptions, "evidence.bounded_loss",
     CapacityMeasure::kNone, true, HasBoundedLoss,
     [](const Evidence& e, double d) { return BoundedHoeffding(*e.bounded_loss, d); }},
    {Family::kBoundedKl, "bounded-kl",
     "kl-Chernoff bound on the mean of a bounded loss (rescaled to [0, 1]) on a hold-out set",
     "Hoeffding (1963), Theorem 1 and its moment-generating-function argument; "
     "Langford (2005)",
     kBoundedLossAssumptions, "evidence.bounded_loss", CapacityMeasure::kNone, true, HasBoundedLoss,
     [](const Evidence& e, double d) { return BoundedKl(*e.bounded_loss, d); }},
    {Family::kBoundedEmpiricalBernstein, "bounded-empirical-bernstein",
     "Empirical Bernstein bound on the mean of a bounded loss on a hold-out set",
     "Maurer & Pontil (2009), Theorem 4", kBoundedLossAssumptions,
     "evidence.bounded_loss with sample_count >= 2 and sample_variance", CapacityMeasure::kNone,
     true, HasBoundedLossTwoSamples,
     [](const Evidence& e, double d) { return BoundedEmpiricalBernstein(*e.bounded_loss, d); }},
    {Family::kPacBayesMcAllester, "pac-bayes-mcallester", "McAllester's PAC-Bayes bound",
     "McAllester (2003), Machine Learning 51:5-21, Theorem 1", kPacBayesAssumptions,
     "evidence.pac_bayes", CapacityMeasure::kNone, false, HasPacBayes,
     [](const Evidence& e, double d) { return PacBayesMcAllester(*e.pac_bayes, d); }},
    {Family::kPacBayesKl, "pac-bayes-kl", "PAC-Bayes-kl bound (binary KL inverse)",
     "Seeger (2002), JMLR 3; Maurer (2004), A note on the PAC Bayesian theorem",
     kPacBayesAssumptions, "evidence.pac_bayes", CapacityMeasure::kNone, false, HasPacBayes,
     [](const Evidence& e, double d) { return PacBayesKl(*e.pac_bayes, d); }},
    {Family::kPacBayesCatoni, "pac-bayes-catoni",
     "Catoni's PAC-Bayes bound, minimum over a fixed grid of 9 constants",
     "Catoni (2007), Theorem 1.2.6; union bound over the grid", kPacBayesAssumptions,
     "evidence.pac_bayes", CapacityMeasure::kNone, false, HasPacBayes,
     [](const Evidence& e, double d) { return PacBayesCatoni(*e.pac_bayes, d); }},
    {Family::kRademacher, "rademacher", "Rademacher-complexity bound on the training error",
     "Mohri, Rostamizadeh & Talwalkar (2018), Theorem 3.5; McDiarmid (1989) for "
     "sampled complexities",
     kRademacherAssumptions, "evidence.rademacher, or evidence.relabel with scheme random signs",
     CapacityMeasure::kNone, false, HasRademacher,
     [](const Evidence& e, double d) {
       return e.rademacher.has_value() ? RademacherBound(*e.rademacher, d)
                                       : RademacherFromDraws(*e.relabel, d);
     }},
    {Family::kSampleCompression, "sample-compression", "Sample-compression bound",
     "Langford (2005), sample compression bound; Littlestone & Warmuth (1986); "
     "Floyd & Warmuth (1995)",
     kCompressionAssumptions, "evidence.compression", CapacityMeasure::kNone, false, HasCompression,
     [](const Evidence& e, double d) { return SampleCompression(*e.compression, d); }},
    {Family::kHoldoutAnytime, "holdout-anytime",
     "Anytime-valid confidence sequence on a hold-out set (one-sided beta-binomial mixture): "
     "holds for every hold-out size at once",
     "Robbins (1970), mixtures of likelihood ratios; Ville (1939), maximal inequality; "
     "Howard, Ramdas, McAuliffe & Sekhon (2021), Ann. Statist. 49(2), one-sided mixture "
     "boundaries",
     "hold-out examples drawn i.i.d. from the deployment distribution after the model (and "
     "every threshold) was fixed; 0-1 loss; the hold-out set may grow and the bound be "
     "recomputed after every batch (any number of looks, stopping whenever)",
     "evidence.holdout", CapacityMeasure::kNone, false, HasHoldout,
     [](const Evidence& e, double d) { return HoldoutAnytime(*e.holdout, d); }},
    {Family::kMaximalDiscrepancy, "maximal-discrepancy",
     "Maximal-discrepancy bound from retraining with half the labels flipped",
     "Bartlett, Boucheron & Lugosi (2002), Machine Learning 48:85-113 (the maximal "
     "discrepancy); the constant 3 sqrt(ln(1/delta)/(2m)) derived by symmetrization and "
     "McDiarmid (1989), not quoted from their theorem",
     kDiscrepancyAssumptions, "evidence.relabel with scheme half flip", CapacityMeasure::kNone,
     false, HasHalfFlip,
     [](const Evidence& e, double d) { return MaximalDiscrepancyBound(*e.relabel, d); }},
}};

}  // namespace

absl::string_view CapacityMeasureName(CapacityMeasure measure) {
  switch (measure) {
    case CapacityMeasure::kVcDimension:
      return "vc_dimension";
    case CapacityMeasure::kLogHypothesisCount:
      return "log_hypothesis_count";
    case CapacityMeasure::kNone:
      break;
  }
  return "";
}

absl::Span<const FamilySpec> Families() { return kFamilies; }

const FamilySpec* FindFamily(Family family) {
  for (const FamilySpec& spec : kFamilies) {
    if (spec.family == family) return &spec;
  }
  return nullptr;
}

const FamilySpec* FindFamilyByName(absl::string_view name) {
  for (const FamilySpec& spec : kFamilies) {
    if (spec.family_name == name) return &spec;
  }
  return nullptr;
}

std::string TrainingFamilyNames() {
  std::vector<std::string> names;
  for (const FamilySpec& spec : kFamilies) {
    if (spec.capacity_measure != CapacityMeasure::kNone) {
      names.push_back(std::string(spec.family_name));
    }
  }
  return absl::StrJoin(names, ", ");
}

}  // namespace riskbound::core
