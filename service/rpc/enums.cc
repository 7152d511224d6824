#include "service/rpc/enums.h"

namespace riskbound::rpc {
namespace {

template <class Wire, class Core>
struct Row {
  Wire wire;
  Core core;
};

// Finds the core value of a wire number in `table`; nullopt when absent.
template <class Wire, class Core, std::size_t N>
std::optional<Core> CoreOf(const Row<Wire, Core> (&table)[N], int wire) {
  for (const Row<Wire, Core>& row : table) {
    if (static_cast<int>(row.wire) == wire) return row.core;
  }
  return std::nullopt;
}

// Finds the wire value of a core value in `table`; `unspecified` when absent
// (only for a core value outside its enum).
template <class Wire, class Core, std::size_t N>
Wire WireOf(const Row<Wire, Core> (&table)[N], Core core, Wire unspecified) {
  for (const Row<Wire, Core>& row : table) {
    if (row.core == core) return row.wire;
  }
  return unspecified;
}

constexpr Row<v1::BoundFamily, core::Family> kFamilies[] = {
    {v1::BOUND_FAMILY_HOLDOUT_EXACT_BINOMIAL, core::Family::kHoldoutExactBinomial},
    {v1::BOUND_FAMILY_HOLDOUT_HOEFFDING, core::Family::kHoldoutHoeffding},
    {v1::BOUND_FAMILY_HOLDOUT_KL_CHERNOFF, core::Family::kHoldoutKlChernoff},
    {v1::BOUND_FAMILY_VC_ADDITIVE, core::Family::kVcAdditive},
    {v1::BOUND_FAMILY_VC_RELATIVE, core::Family::kVcRelative},
    {v1::BOUND_FAMILY_OCCAM_HOEFFDING, core::Family::kOccamHoeffding},
    {v1::BOUND_FAMILY_OCCAM_KL, core::Family::kOccamKl},
    {v1::BOUND_FAMILY_BOUNDED_HOEFFDING, core::Family::kBoundedHoeffding},
    {v1::BOUND_FAMILY_BOUNDED_KL, core::Family::kBoundedKl},
    {v1::BOUND_FAMILY_BOUNDED_EMPIRICAL_BERNSTEIN, core::Family::kBoundedEmpiricalBernstein},
    {v1::BOUND_FAMILY_PAC_BAYES_MCALLESTER, core::Family::kPacBayesMcAllester},
    {v1::BOUND_FAMILY_PAC_BAYES_KL, core::Family::kPacBayesKl},
    {v1::BOUND_FAMILY_PAC_BAYES_CATONI, core::Family::kPacBayesCatoni},
    {v1::BOUND_FAMILY_RADEMACHER, core::Family::kRademacher},
    {v1::BOUND_FAMILY_SAMPLE_COMPRESSION, core::Family::kSampleCompression},
    {v1::BOUND_FAMILY_HOLDOUT_ANYTIME, core::Family::kHoldoutAnytime},
    {v1::BOUND_FAMILY_MAXIMAL_DISCREPANCY, core::Family::kMaximalDiscrepancy},
};

constexpr Row<v1::RelabelScheme, core::RelabelScheme> kRelabelSchemes[] = {
    {v1::RELABEL_SCHEME_RANDOM_SIGNS, core::RelabelScheme::kRandomSigns},
    {v1::RELABEL_SCHEME_HALF_FLIP, core::RelabelScheme::kHalfFlip},
};

constexpr Row<v1::RelabelTraining, core::RelabelTraining> kRelabelTrainings[] = {
    {v1::RELABEL_TRAINING_EXACT, core::RelabelTraining::kExact},
    {v1::RELABEL_TRAINING_APPROXIMATE, core::RelabelTraining::kApproximate},
};

constexpr Row<v1::SliceShareRule, core::SliceShareRule> kSliceShareRules[] = {
    {v1::SLICE_SHARE_RULE_BONFERRONI, core::SliceShareRule::kBonferroni},
    {v1::SLICE_SHARE_RULE_SIDAK, core::SliceShareRule::kSidak},
};

constexpr Row<v1::SliceOutcome, core::SliceOutcome> kSliceOutcomes[] = {
    {v1::SLICE_OUTCOME_CLEARS, core::SliceOutcome::kClears},
    {v1::SLICE_OUTCOME_EXCEEDS, core::SliceOutcome::kExceeds},
    {v1::SLICE_OUTCOME_UNDECIDED, core::SliceOutcome::kUndecided},
};

constexpr Row<v1::PacBayesTarget, core::PacBayesTarget> kPacBayesTargets[] = {
    {v1::PAC_BAYES_TARGET_GIBBS, core::PacBayesTarget::kGibbs},
    {v1::PAC_BAYES_TARGET_MAJORITY_VOTE, core::PacBayesTarget::kMajorityVote},
};

constexpr Row<v1::ModelKind, core::ModelKind> kModelKinds[] = {
    {v1::MODEL_KIND_HALFSPACE, core::ModelKind::kHalfspace},
    {v1::MODEL_KIND_POLYNOMIAL_THRESHOLD, core::ModelKind::kPolynomialThreshold},
    {v1::MODEL_KIND_MARGIN_LINEAR, core::ModelKind::kMarginLinear},
    {v1::MODEL_KIND_AXIS_ALIGNED_BOXES, core::ModelKind::kAxisAlignedBoxes},
    {v1::MODEL_KIND_INTERVAL, core::ModelKind::kInterval},
    {v1::MODEL_KIND_UNION_OF_INTERVALS, core::ModelKind::kUnionOfIntervals},
    {v1::MODEL_KIND_DECISION_STUMP, core::ModelKind::kDecisionStump},
    {v1::MODEL_KIND_DECISION_TREE, core::ModelKind::kDecisionTree},
    {v1::MODEL_KIND_VOTED_ENSEMBLE, core::ModelKind::kVotedEnsemble},
    {v1::MODEL_KIND_THRESHOLD_NETWORK, core::ModelKind::kThresholdNetwork},
    {v1::MODEL_KIND_RELU_NETWORK, core::ModelKind::kReluNetwork},
    {v1::MODEL_KIND_SIGMOID_NETWORK, core::ModelKind::kSigmoidNetwork},
    {v1::MODEL_KIND_FINITE_CLASS, core::ModelKind::kFiniteClass},
    {v1::MODEL_KIND_NEAREST_NEIGHBOUR, core::ModelKind::kNearestNeighbour},
    {v1::MODEL_KIND_RBF_KERNEL_NO_MARGIN, core::ModelKind::kRbfKernelNoMargin},
};

constexpr Row<v1::CapacityStatus, core::CapacityStatus> kCapacityStatuses[] = {
    {v1::CAPACITY_STATUS_EXACT, core::CapacityStatus::kExact},
    {v1::CAPACITY_STATUS_UPPER_BOUND, core::CapacityStatus::kUpperBound},
    {v1::CAPACITY_STATUS_INFINITE, core::CapacityStatus::kInfinite},
};

constexpr Row<v1::DeltaSpread, core::DeltaSpread> kDeltaSpreads[] = {
    {v1::DELTA_SPREAD_UNIFORM, core::DeltaSpread::kUniform},
    {v1::DELTA_SPREAD_INVERSE_SQUARE, core::DeltaSpread::kInverseSquare},
    {v1::DELTA_SPREAD_CALLER_WEIGHTS, core::DeltaSpread::kCallerWeights},
};

constexpr Row<v1::Verdict, core::Verdict> kVerdicts[] = {
    {v1::VERDICT_PROMOTE, core::Verdict::kPromote},
    {v1::VERDICT_HOLD, core::Verdict::kHold},
    {v1::VERDICT_REJECT, core::Verdict::kReject},
};

constexpr Row<v1::DeltaSharing, core::DeltaSharing> kDeltaSharings[] = {
    {v1::DELTA_SHARING_PER_RECORD, core::DeltaSharing::kPerRecord},
    {v1::DELTA_SHARING_PER_HOLDOUT_SET, core::DeltaSharing::kPerHoldoutSet},
};

}  // namespace

std::optional<core::Family> FamilyFromProto(int wire) { return CoreOf(kFamilies, wire); }
v1::BoundFamily FamilyToProto(core::Family family) {
  return WireOf(kFamilies, family, v1::BOUND_FAMILY_UNSPECIFIED);
}

std::optional<core::PacBayesTarget> PacBayesTargetFromProto(int wire) {
  return CoreOf(kPacBayesTargets, wire);
}
v1::PacBayesTarget PacBayesTargetToProto(core::PacBayesTarget target) {
  return WireOf(kPacBayesTargets, target, v1::PAC_BAYES_TARGET_UNSPECIFIED);
}

std::optional<core::RelabelScheme> RelabelSchemeFromProto(int wire) {
  return CoreOf(kRelabelSchemes, wire);
}
v1::RelabelScheme RelabelSchemeToProto(core::RelabelScheme scheme) {
  return WireOf(kRelabelSchemes, scheme, v1::RELABEL_SCHEME_UNSPECIFIED);
}

std::optional<core::RelabelTraining> RelabelTrainingFromProto(int wire) {
  return CoreOf(kRelabelTrainings, wire);
}
v1::RelabelTraining RelabelTrainingToProto(core::RelabelTraining training) {
  return WireOf(kRelabelTrainings, training, v1::RELABEL_TRAINING_UNSPECIFIED);
}

std::optional<core::SliceShareRule> SliceShareRuleFromProto(int wire) {
  return CoreOf(kSliceShareRules, wire);
}
v1::SliceShareRule SliceShareRuleToProto(core::SliceShareRule rule) {
  return WireOf(kSliceShareRules, rule, v1::SLICE_SHARE_RULE_UNSPECIFIED);
}

std::optional<core::SliceOutcome> SliceOutcomeFromProto(int wire) {
  return CoreOf(kSliceOutcomes, wire);
}
v1::SliceOutcome SliceOutcomeToProto(core::SliceOutcome outcome) {
  return WireOf(kSliceOutcomes, outcome, v1::SLICE_OUTCOME_UNSPECIFIED);
}

std::optional<core::ModelKind> ModelKindFromProto(int wire) { return CoreOf(kModelKinds, wire); }
v1::ModelKind ModelKindToProto(core::ModelKind kind) {
  return WireOf(kModelKinds, kind, v1::MODEL_KIND_UNSPECIFIED);
}

std::optional<core::CapacityStatus> CapacityStatusFromProto(int wire) {
  return CoreOf(kCapacityStatuses, wire);
}
v1::CapacityStatus CapacityStatusToProto(core::CapacityStatus status) {
  return WireOf(kCapacityStatuses, status, v1::CAPACITY_STATUS_UNSPECIFIED);
}

std::optional<core::DeltaSpread> DeltaSpreadFromProto(int wire) {
  return CoreOf(kDeltaSpreads, wire);
}
v1::DeltaSpread DeltaSpreadToProto(core::DeltaSpread spread) {
  return WireOf(kDeltaSpreads, spread, v1::DELTA_SPREAD_UNSPECIFIED);
}

std::optional<core::Verdict> VerdictFromProto(int wire) { return CoreOf(kVerdicts, wire); }
v1::Verdict VerdictToProto(core::Verdict verdict) {
  return WireOf(kVerdicts, verdict, v1::VERDICT_UNSPECIFIED);
}

std::optional<core::DeltaSharing> DeltaSharingFromProto(int wire) {
  return CoreOf(kDeltaSharings, wire);
}
v1::DeltaSharing DeltaSharingToProto(core::DeltaSharing sharing) {
  return WireOf(kDeltaSharings, sharing, v1::DELTA_SHARING_UNSPECIFIED);
}

}  // namespace riskbound::rpc
