// RiskBound.ListFamilies over a loopback channel: one description per bound
// family of the proto's BoundFamily enum, each with its CLI name, title,
// published source, assumptions and the evidence it needs, in the order
// Certify's all_applicable lists certificates in.
#include <set>
#include <string>

#include "gmock/gmock.h"
#include "google/protobuf/descriptor.h"
#include "gtest/gtest.h"
#include "riskbound/v1/riskbound.grpc.pb.h"
#include "service/core/stop.h"
#include "service/rpc/handlers.h"
#include "tests/testing/loopback_server.h"

namespace riskbound::rpc {
namespace {

using ::testing::HasSubstr;
using ::testing::IsEmpty;
using ::testing::Not;

class FamiliesRpcTest : public ::riskbound::testing::LoopbackServerTest {
 protected:
  v1::ListFamiliesResponse List() {
    v1::ListFamiliesResponse resp;
    const grpc::Status s = stub_->ListFamilies(::riskbound::testing::CallContext().get(),
                                               v1::ListFamiliesRequest(), &resp);
    EXPECT_TRUE(s.ok()) << s.error_message();
    return resp;
  }
};

TEST_F(FamiliesRpcTest, EveryEnumValueIsDescribedOnce) {
  const v1::ListFamiliesResponse resp = List();
  std::set<int> listed;
  std::set<std::string> names;
  for (const v1::FamilyDescription& f : resp.families()) {
    EXPECT_NE(f.family(), v1::BOUND_FAMILY_UNSPECIFIED);
    EXPECT_TRUE(listed.insert(f.family()).second) << f.family_name() << " listed twice";
    EXPECT_TRUE(names.insert(f.family_name()).second) << f.family_name() << " named twice";
    EXPECT_THAT(f.title(), Not(IsEmpty())) << f.family_name();
    EXPECT_THAT(f.source(), Not(IsEmpty())) << f.family_name();
    EXPECT_THAT(f.assumptions(), Not(IsEmpty())) << f.family_name();
    EXPECT_THAT(f.evidence_needed(), HasSubstr("evidence.")) << f.family_name();
  }
  // Every value of the wire enum but UNSPECIFIED, read from the descriptor.
  const google::protobuf::EnumDescriptor* e = v1::BoundFamily_descriptor();
  std::set<int> expected;
  for (int i = 0; i < e->value_count(); ++i) {
    if (e->value(i)->number() != v1::BOUND_FAMILY_UNSPECIFIED) {
      expected.insert(e->value(i)->number());
    }
  }
  EXPECT_EQ(listed, expected);
  EXPECT_FALSE(resp.engine_version().empty());
}

TEST_F(FamiliesRpcTest, NamesSourcesAndNeedsOfKnownFamilies) {
  const v1::ListFamiliesResponse resp = List();
  ASSERT_GE(resp.families_size(), 3);
  // Registry order: the three hold-out families first.
  EXPECT_EQ(resp.families(0).family(), v1::BOUND_FAMILY_HOLDOUT_EXACT_BINOMIAL);
  EXPECT_EQ(resp.families(0).family_name(), "holdout-binomial");
  EXPECT_THAT(resp.families(0).source(), HasSubstr("Clopper & Pearson (1934)"));
  EXPECT_EQ(resp.families(0).evidence_needed(), "evidence.holdout");
  bool saw_kl = false;
  bool saw_vc = false;
  for (const v1::FamilyDescription& f : resp.families()) {
    if (f.family() == v1::BOUND_FAMILY_HOLDOUT_KL_CHERNOFF) {
      saw_kl = true;
      EXPECT_EQ(f.family_name(), "holdout-kl");
      EXPECT_THAT(f.source(), HasSubstr("Chernoff (1952)"));
    }
    if (f.family() == v1::BOUND_FAMILY_VC_ADDITIVE) {
      saw_vc = true;
      EXPECT_EQ(f.family_name(), "vc-additive");
      EXPECT_THAT(f.evidence_needed(), HasSubstr("capacity.vc_dimension"));
      EXPECT_THAT(f.source(), HasSubstr("Vapnik"));
    }
  }
  EXPECT_TRUE(saw_kl);
  EXPECT_TRUE(saw_vc);
}

TEST_F(FamiliesRpcTest, NamesAgreeWithCertify) {
  // A family's name in the list is the one its certificates carry.
  const v1::ListFamiliesResponse list = List();
  v1::CertifyRequest req;
  req.mutable_evidence()->mutable_holdout()->set_error_count(3);
  req.mutable_evidence()->mutable_holdout()->set_sample_count(500);
  req.set_failure_probability(0.05);
  req.mutable_all_applicable();
  v1::CertifyResponse resp;
  ASSERT_TRUE(stub_->Certify(::riskbound::testing::CallContext().get(), req, &resp).ok());
  ASSERT_EQ(resp.certificates_size(), 3);
  for (int i = 0; i < resp.certificates_size(); ++i) {
    EXPECT_EQ(resp.certificates(i).family(), list.families(i).family());
    EXPECT_EQ(resp.certificates(i).family_name(), list.families(i).family_name());
    EXPECT_EQ(resp.certificates(i).source(), list.families(i).source());
  }
}

TEST(ListFamiliesHandlerTest, StoppedCallReturnsTheStopStatus) {
  core::StopToken stop;
  stop.Cancel();
  const CallInfo call{.stop = stop, .request_id = ""};
  EXPECT_EQ(HandleListFamilies(v1::ListFamiliesRequest(), call).status().code(),
            absl::StatusCode::kCancelled);
}

}  // namespace
}  // namespace riskbound::rpc
