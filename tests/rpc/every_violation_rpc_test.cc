// Every bad field of a request is reported in one answer, each by its wire
// path, through a real server on a loopback channel: the core validates the
// whole request before it computes, and the RPC layer copies without
// returning early. (Issue: "failure_probability 2 plus a duplicated family
// reported only the failure probability".)
#include <string>
#include <vector>

#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "riskbound/v1/riskbound.grpc.pb.h"
#include "tests/rpc/error_details.h"
#include "tests/testing/loopback_server.h"

namespace riskbound::rpc {
namespace {

using ::riskbound::testing::CallContext;
using ::riskbound::testing::ErrorInfoOf;
using ::riskbound::testing::ViolatedFieldsOf;
using ::testing::ElementsAre;
using ::testing::UnorderedElementsAre;

class EveryViolationTest : public ::riskbound::testing::LoopbackServerTest {
 protected:
  // The violated paths of an answer that must be INVALID_ARGUMENT.
  template <class Request, class Response>
  std::vector<std::string> Refused(
      grpc::Status (v1::RiskBound::Stub::*method)(grpc::ClientContext*, const Request&,
                                                   Response*),
      const Request& request) {
    Response response;
    const grpc::Status s = (stub_->*method)(CallContext().get(), request, &response);
    EXPECT_EQ(s.error_code(), grpc::StatusCode::INVALID_ARGUMENT) << s.error_message();
    const auto info = ErrorInfoOf(s);
    EXPECT_TRUE(info.has_value());
    const std::vector<std::string> fields = ViolatedFieldsOf(s);
    if (info.has_value()) {
      EXPECT_EQ(info->metadata().at("violation_count"), std::to_string(fields.size()));
    }
    return fields;
  }
};

TEST_F(EveryViolationTest, CertifyFailureProbabilityAndDuplicatedFamily) {
  v1::CertifyRequest req;
  req.mutable_evidence()->mutable_holdout()->set_error_count(3);
  req.mutable_evidence()->mutable_holdout()->set_sample_count(100);
  req.set_failure_probability(2.0);
  req.mutable_listed()->add_families(v1::BOUND_FAMILY_HOLDOUT_HOEFFDING);
  req.mutable_listed()->add_families(v1::BOUND_FAMILY_HOLDOUT_HOEFFDING);
  EXPECT_THAT(Refused(&v1::RiskBound::Stub::Certify, req),
              ElementsAre("failure_probability", "listed.families[1]"));
}

TEST_F(EveryViolationTest, CertifyEvidenceFamiliesAndWeightsTogether) {
  v1::CertifyRequest req;
  req.mutable_evidence()->mutable_holdout()->set_error_count(5);
  req.mutable_evidence()->mutable_holdout()->set_sample_count(3);
  auto* t = req.mutable_evidence()->mutable_training();
  t->set_error_count(1);
  t->set_sample_count(100);
  t->mutable_capacity()->mutable_model()->set_kind(v1::MODEL_KIND_HALFSPACE);  // no dimension
  req.set_failure_probability(0.05);
  req.mutable_listed()->add_families(v1::BOUND_FAMILY_PAC_BAYES_KL);  // no PAC-Bayes evidence
  req.mutable_listed()->add_families(static_cast<v1::BoundFamily>(77));  // unknown number
  req.mutable_listed()->add_delta_weights(0.5);
  req.mutable_listed()->add_delta_weights(-1.0);
  EXPECT_THAT(Refused(&v1::RiskBound::Stub::Certify, req),
              ElementsAre("evidence.holdout.error_count",
                          "evidence.training.capacity.model.dimension", "listed.families[0]",
                          "listed.families[1]", "listed.delta_weights[1]"));
}

TEST_F(EveryViolationTest, EstimateCapacityUnusedFieldsWithTheKindsOwnChecks) {
  v1::EstimateCapacityRequest req;
  req.mutable_model()->set_kind(v1::MODEL_KIND_HALFSPACE);
  req.mutable_model()->set_degree(3);     // not used by a halfspace
  req.mutable_model()->set_dimension(0);  // must be >= 1
  EXPECT_THAT(Refused(&v1::RiskBound::Stub::EstimateCapacity, req),
              ElementsAre("model.degree", "model.dimension"));
}

TEST_F(EveryViolationTest, SelectStructureEveryField) {
  v1::SelectStructureRequest req;  // family unset
  req.set_failure_probability(0.0);
  req.set_fragility_tolerance(-1.0);
  auto* a = req.add_structure();
  a->set_id("a");
  a->set_sample_count(0);
  a->mutable_capacity()->set_vc_dimension(3);
  auto* b = req.add_structure();
  b->set_id("a");
  b->set_error_count(5);
  b->set_sample_count(4);  // and no capacity
  EXPECT_THAT(Refused(&v1::RiskBound::Stub::SelectStructure, req),
              ElementsAre("failure_probability", "fragility_tolerance", "family",
                          "structure[0].sample_count", "structure[1].id",
                          "structure[1].capacity", "structure[1].error_count"));
}

TEST_F(EveryViolationTest, SelectUnknownSpreadWithTheRest) {
  v1::SelectStructureRequest req;
  req.set_family(v1::BOUND_FAMILY_VC_ADDITIVE);
  req.set_failure_probability(2.0);
  req.set_delta_spread(static_cast<v1::DeltaSpread>(9));
  auto* a = req.add_structure();
  a->set_id("a");
  a->set_sample_count(10);
  a->mutable_capacity()->set_vc_dimension(3);
  EXPECT_THAT(Refused(&v1::RiskBound::Stub::SelectStructure, req),
              ElementsAre("delta_spread", "failure_probability"));
}

TEST_F(EveryViolationTest, TrainingPlanEveryField) {
  v1::PlanSamplesRequest req;
  auto* t = req.mutable_training();  // family and capacity unset
  t->set_expected_empirical_risk(-0.1);
  t->set_target_risk(0.0);
  t->set_failure_probability(1.0);
  EXPECT_THAT(Refused(&v1::RiskBound::Stub::PlanSamples, req),
              ElementsAre("training.family", "training.capacity",
                          "training.expected_empirical_risk", "training.target_risk",
                          "training.failure_probability"));
}

TEST_F(EveryViolationTest, GatePolicyCandidateAndChampionTogether) {
  v1::GateRequest req;
  req.mutable_policy()->set_max_risk(1.5);
  req.mutable_policy()->set_failure_probability(0.05);
  req.mutable_policy()->add_allowed_families(v1::BOUND_FAMILY_HOLDOUT_HOEFFDING);
  req.mutable_policy()->add_allowed_families(v1::BOUND_FAMILY_HOLDOUT_HOEFFDING);
  req.mutable_policy()->set_plan_pass_probability(1.0);
  req.mutable_candidate()->set_id("parcel-router-v4");
  req.mutable_candidate()->mutable_evidence()->mutable_holdout()->set_error_count(50);
  req.mutable_candidate()->mutable_evidence()->mutable_holdout()->set_sample_count(40);
  req.mutable_champion()->set_champion_id("");  // empty, and no comparison
  EXPECT_THAT(Refused(&v1::RiskBound::Stub::Gate, req),
              UnorderedElementsAre("policy.max_risk", "policy.plan_pass_probability",
                                   "policy.allowed_families[1]",
                                   "candidate.evidence.holdout.error_count",
                                   "champion.champion_id", "champion"));
}

}  // namespace
}  // namespace riskbound::rpc
