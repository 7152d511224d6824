// Every value of every riskbound.v1 enum, read from the protobuf descriptor
// pool (so a value or an enum added to the .proto files is checked without
// editing this test), maps through the explicit tables of
// service/rpc/enums.h to a core value and back to itself; the X_UNSPECIFIED
// = 0 value maps to no core value. Every core value maps to a wire value
// other than UNSPECIFIED. Source: the descriptors generated from
// proto/riskbound/v1 (protoc), checked against the tables.
#include <functional>
#include <map>
#include <optional>
#include <set>
#include <string>

#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "google/protobuf/descriptor.h"
#include "gtest/gtest.h"
#include "riskbound/v1/riskbound.grpc.pb.h"
#include "service/rpc/enums.h"

namespace riskbound::rpc {
namespace {

// A wire number's round trip: nullopt when the table has no core value for
// it, else the wire number the core value maps back to.
using RoundTrip = std::function<std::optional<int>(int)>;

template <class Core, class Wire>
RoundTrip Through(std::optional<Core> (*from)(int), Wire (*to)(Core)) {
  return [from, to](int wire) -> std::optional<int> {
    const std::optional<Core> core = from(wire);
    if (!core.has_value()) return std::nullopt;
    return static_cast<int>(to(*core));
  };
}

// One table per riskbound.v1 enum, by the enum's full name.
const std::map<std::string, RoundTrip>& Tables() {
  static const auto* const kTables = new std::map<std::string, RoundTrip>{
      {"riskbound.v1.BoundFamily", Through(&FamilyFromProto, &FamilyToProto)},
      {"riskbound.v1.PacBayesTarget", Through(&PacBayesTargetFromProto, &PacBayesTargetToProto)},
      {"riskbound.v1.RelabelScheme", Through(&RelabelSchemeFromProto, &RelabelSchemeToProto)},
      {"riskbound.v1.RelabelTraining", Through(&RelabelTrainingFromProto, &RelabelTrainingToProto)},
      {"riskbound.v1.ModelKind", Through(&ModelKindFromProto, &ModelKindToProto)},
      {"riskbound.v1.CapacityStatus", Through(&CapacityStatusFromProto, &CapacityStatusToProto)},
      {"riskbound.v1.DeltaSpread", Through(&DeltaSpreadFromProto, &DeltaSpreadToProto)},
      {"riskbound.v1.Verdict", Through(&VerdictFromProto, &VerdictToProto)},
      {"riskbound.v1.DeltaSharing", Through(&DeltaSharingFromProto, &DeltaSharingToProto)},
      {"riskbound.v1.SliceShareRule", Through(&SliceShareRuleFromProto, &SliceShareRuleToProto)},
      {"riskbound.v1.SliceOutcome", Through(&SliceOutcomeFromProto, &SliceOutcomeToProto)},
  };
  return *kTables;
}

// Every enum of package riskbound.v1, found through the service's file and
// its imports in the generated descriptor pool (as server reflection finds
// them).
std::vector<const google::protobuf::EnumDescriptor*> AllEnums() {
  // riskbound.proto declares only the service: nothing else of this test
  // refers to its generated file, so refer to its descriptor table (protoc's
  // name for it) to have the linker keep it and register it in the pool.
  const void* volatile keep = &descriptor_table_riskbound_2fv1_2friskbound_2eproto;
  EXPECT_NE(keep, nullptr);
  std::vector<const google::protobuf::EnumDescriptor*> out;
  std::set<const google::protobuf::FileDescriptor*> seen;
  const google::protobuf::ServiceDescriptor* service =
      google::protobuf::DescriptorPool::generated_pool()->FindServiceByName(
          v1::RiskBound::service_full_name());
  EXPECT_NE(service, nullptr);
  if (service == nullptr) return out;
  std::vector<const google::protobuf::FileDescriptor*> todo = {service->file()};
  while (!todo.empty()) {
    const google::protobuf::FileDescriptor* file = todo.back();
    todo.pop_back();
    if (!seen.insert(file).second) continue;
    for (int i = 0; i < file->dependency_count(); ++i) todo.push_back(file->dependency(i));
    if (file->package() != "riskbound.v1") continue;
    for (int i = 0; i < file->enum_type_count(); ++i) out.push_back(file->enum_type(i));
    std::vector<const google::protobuf::Descriptor*> messages;
    for (int i = 0; i < file->message_type_count(); ++i) messages.push_back(file->message_type(i));
    while (!messages.empty()) {
      const google::protobuf::Descriptor* m = messages.back();
      messages.pop_back();
      for (int i = 0; i < m->enum_type_count(); ++i) out.push_back(m->enum_type(i));
      for (int i = 0; i < m->nested_type_count(); ++i) messages.push_back(m->nested_type(i));
    }
  }
  return out;
}

TEST(EnumTablesTest, EveryWireValueMapsToACoreValueAndBack) {
  const std::vector<const google::protobuf::EnumDescriptor*> enums = AllEnums();
  // The six of today; a new enum fails below until it has a table.
  ASSERT_GE(enums.size(), 6u);
  for (const google::protobuf::EnumDescriptor* e : enums) {
    SCOPED_TRACE(e->full_name());
    const auto table = Tables().find(e->full_name());
    ASSERT_NE(table, Tables().end()) << "no table in service/rpc/enums.h";
    ASSERT_GE(e->value_count(), 2);
    for (int i = 0; i < e->value_count(); ++i) {
      const google::protobuf::EnumValueDescriptor* v = e->value(i);
      SCOPED_TRACE(v->name());
      const std::optional<int> back = table->second(v->number());
      if (v->number() == 0) {
        // X_UNSPECIFIED = 0: the caller left it unset; no core value.
        EXPECT_TRUE(absl::EndsWith(v->name(), "_UNSPECIFIED"));
        EXPECT_FALSE(back.has_value());
      } else {
        ASSERT_TRUE(back.has_value()) << "no core value";
        EXPECT_EQ(*back, v->number());
      }
    }
    // A number the .proto does not define (a newer client's) has no core
    // value either: the core is told the field names nothing it knows.
    int unknown = 1;
    while (e->FindValueByNumber(unknown) != nullptr) ++unknown;
    EXPECT_FALSE(table->second(unknown).has_value());
    EXPECT_FALSE(table->second(-1).has_value());
  }
  // No table without an enum (a removed or renamed enum).
  std::set<std::string> names;
  for (const google::protobuf::EnumDescriptor* e : enums) names.insert(e->full_name());
  for (const auto& [name, table] : Tables()) EXPECT_EQ(names.count(name), 1u) << name;
}

// The other direction: every core value has a wire value. The core enums
// have no reflection, so their values are listed from the core headers.
TEST(EnumTablesTest, EveryCoreValueMapsToAWireValue) {
  for (core::Family f :
       {core::Family::kHoldoutExactBinomial, core::Family::kHoldoutHoeffding,
        core::Family::kHoldoutKlChernoff, core::Family::kVcAdditive, core::Family::kVcRelative,
        core::Family::kOccamHoeffding, core::Family::kOccamKl, core::Family::kBoundedHoeffding,
        core::Family::kBoundedKl, core::Family::kBoundedEmpiricalBernstein,
        core::Family::kPacBayesMcAllester, core::Family::kPacBayesKl, core::Family::kPacBayesCatoni,
        core::Family::kRademacher, core::Family::kSampleCompression,
        core::Family::kHoldoutAnytime, core::Family::kMaximalDiscrepancy}) {
    EXPECT_NE(FamilyToProto(f), v1::BOUND_FAMILY_UNSPECIFIED);
    EXPECT_EQ(FamilyFromProto(FamilyToProto(f)), f);
  }
  for (core::PacBayesTarget t : {core::PacBayesTarget::kGibbs, core::PacBayesTarget::kMajorityVote}) {
    EXPECT_EQ(PacBayesTargetFromProto(PacBayesTargetToProto(t)), t);
  }
  for (core::RelabelScheme s :
       {core::RelabelScheme::kRandomSigns, core::RelabelScheme::kHalfFlip}) {
    EXPECT_EQ(RelabelSchemeFromProto(RelabelSchemeToProto(s)), s);
  }
  for (core::RelabelTraining t :
       {core::RelabelTraining::kExact, core::RelabelTraining::kApproximate}) {
    EXPECT_EQ(RelabelTrainingFromProto(RelabelTrainingToProto(t)), t);
  }
  for (core::CapacityStatus s : {core::CapacityStatus::kExact, core::CapacityStatus::kUpperBound,
                                 core::CapacityStatus::kInfinite}) {
    EXPECT_EQ(CapacityStatusFromProto(CapacityStatusToProto(s)), s);
  }
  for (core::DeltaSpread s : {core::DeltaSpread::kUniform, core::DeltaSpread::kInverseSquare,
                              core::DeltaSpread::kCallerWeights}) {
    EXPECT_EQ(DeltaSpreadFromProto(DeltaSpreadToProto(s)), s);
  }
  for (core::Verdict v : {core::Verdict::kPromote, core::Verdict::kHold, core::Verdict::kReject}) {
    EXPECT_EQ(VerdictFromProto(VerdictToProto(v)), v);
  }
  for (core::DeltaSharing d :
       {core::DeltaSharing::kPerRecord, core::DeltaSharing::kPerHoldoutSet}) {
    EXPECT_EQ(DeltaSharingFromProto(DeltaSharingToProto(d)), d);
  }
  // Model kinds: every value has a distinct wire value (15 kinds).
  std::set<int> wires;
  for (int n = 1; n < 64; ++n) {
    if (const std::optional<core::ModelKind> k = ModelKindFromProto(n)) {
      wires.insert(static_cast<int>(ModelKindToProto(*k)));
    }
  }
  EXPECT_EQ(wires.size(), static_cast<std::size_t>(v1::ModelKind_descriptor()->value_count() - 1));
}

}  // namespace
}  // namespace riskbound::rpc
