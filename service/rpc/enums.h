// One explicit table per enum between the core and riskbound.v1: every
// conversion of an enum value across the two layers goes through here, never
// through a cast, so a renumbered or added value cannot silently map to the
// wrong one. tests/rpc/enums_rpc_test.cc walks every value of every
// riskbound.v1 enum (from the protobuf descriptor pool) through these tables.
//
// The X_UNSPECIFIED = 0 value of each wire enum has no core value: the
// FromProto functions return nullopt for it, as for a number the table does
// not know (a client built from a newer .proto may send one), and the caller
// decides what an unset value means (the core's default, or a violation).
#ifndef RISKBOUND_SERVICE_RPC_ENUMS_H_
#define RISKBOUND_SERVICE_RPC_ENUMS_H_

#include <optional>

#include "riskbound/v1/capacity.pb.h"
#include "riskbound/v1/common.pb.h"
#include "riskbound/v1/gate.pb.h"
#include "riskbound/v1/registry.pb.h"
#include "riskbound/v1/select.pb.h"
#include "service/core/capacity.h"
#include "service/core/evidence.h"
#include "service/core/gate.h"
#include "service/core/registry.h"
#include "service/core/select.h"
#include "service/core/slices.h"

namespace riskbound::rpc {

// Wire values arrive as int: proto3 enums are open, so a repeated or
// singular enum field may hold any number.
std::optional<core::Family> FamilyFromProto(int wire);
v1::BoundFamily FamilyToProto(core::Family family);

std::optional<core::PacBayesTarget> PacBayesTargetFromProto(int wire);
v1::PacBayesTarget PacBayesTargetToProto(core::PacBayesTarget target);

std::optional<core::RelabelScheme> RelabelSchemeFromProto(int wire);
v1::RelabelScheme RelabelSchemeToProto(core::RelabelScheme scheme);

std::optional<core::RelabelTraining> RelabelTrainingFromProto(int wire);
v1::RelabelTraining RelabelTrainingToProto(core::RelabelTraining training);

std::optional<core::SliceShareRule> SliceShareRuleFromProto(int wire);
v1::SliceShareRule SliceShareRuleToProto(core::SliceShareRule rule);

std::optional<core::SliceOutcome> SliceOutcomeFromProto(int wire);
v1::SliceOutcome SliceOutcomeToProto(core::SliceOutcome outcome);

std::optional<core::ModelKind> ModelKindFromProto(int wire);
v1::ModelKind ModelKindToProto(core::ModelKind kind);

std::optional<core::CapacityStatus> CapacityStatusFromProto(int wire);
v1::CapacityStatus CapacityStatusToProto(core::CapacityStatus status);

std::optional<core::DeltaSpread> DeltaSpreadFromProto(int wire);
v1::DeltaSpread DeltaSpreadToProto(core::DeltaSpread spread);

std::optional<core::Verdict> VerdictFromProto(int wire);
v1::Verdict VerdictToProto(core::Verdict verdict);

std::optional<core::DeltaSharing> DeltaSharingFromProto(int wire);
v1::DeltaSharing DeltaSharingToProto(core::DeltaSharing sharing);

}  // namespace riskbound::rpc

#endif  // RISKBOUND_SERVICE_RPC_ENUMS_H_
