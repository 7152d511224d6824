#include <memory>

#include "gmock/gmock.h"
#include "grpcpp/create_channel.h"
#include "grpcpp/security/credentials.h"
#include "gtest/gtest.h"
#include "riskbound/v1/riskbound.grpc.pb.h"
#include "service/rpc/convert.h"
#include "service/rpc/server.h"
#include "tests/testing/loopback_server.h"
#include "service/rpc/status.h"
#include "tests/testing/status_matchers.h"
#include "tests/rpc/error_details.h"

namespace riskbound::rpc {
namespace {

using ::riskbound::testing::StatusIs;
using ::testing::HasSubstr;

class ServiceTest : public ::riskbound::testing::LoopbackServerTest {
 protected:

  grpc::Status Call(const v1::CertifyRequest& req, v1::CertifyResponse* resp) {
    return stub_->Certify(::riskbound::testing::CallContext().get(), req, resp);
  }

};

// Source: Clopper & Pearson (1934) via the rule of three (Hanley &
// Lippman-Hand 1983): 0 errors in 300 at delta = 0.05 -> 0.009936.
TEST_F(ServiceTest, CertifyOverLoopback) {
  v1::CertifyRequest req;
  req.mutable_evidence()->mutable_holdout()->set_sample_count(300);
  req.set_failure_probability(0.05);
  v1::CertifyResponse resp;
  ASSERT_TRUE(Call(req, &resp).ok());
  ASSERT_EQ(resp.certificates_size(), 1);
  EXPECT_NEAR(resp.tightest().risk_upper_bound(), 0.009936, 5e-7);
  EXPECT_EQ(resp.tightest().family_name(), "holdout-binomial");
  EXPECT_THAT(resp.tightest().source(), HasSubstr("Clopper & Pearson"));
  EXPECT_TRUE(resp.tightest().has_risk_lower_bound());
  EXPECT_EQ(resp.delta_accounting().family_count(), 1u);
  EXPECT_EQ(resp.cautions_size(), 3);
  EXPECT_FALSE(resp.engine_version().empty());
}

TEST_F(ServiceTest, InvalidArgumentCarriesFieldViolations) {
  v1::CertifyRequest req;
  req.mutable_evidence()->mutable_training()->set_sample_count(10);
  req.mutable_evidence()->mutable_training()->set_error_count(1);
  req.mutable_evidence()->mutable_training()->mutable_capacity()->set_hypothesis_count(0);
  req.set_failure_probability(0.05);
  v1::CertifyResponse resp;
  const grpc::Status status = Call(req, &resp);
  EXPECT_EQ(status.error_code(), grpc::StatusCode::INVALID_ARGUMENT);
  EXPECT_THAT(status.error_message(),
              HasSubstr("evidence.training.capacity.hypothesis_count: must be at least 1"));
  const auto violations = ::riskbound::testing::ViolationsOf(status);
  // Exactly one: the core resolves the capacity and names it once.
  ASSERT_EQ(violations.size(), 1u);
  EXPECT_EQ(violations[0].first, "evidence.training.capacity.hypothesis_count");
  EXPECT_EQ(violations[0].second, "must be at least 1");
}

// The trailer holds the standard google.rpc.Status with a BadRequest and an
// ErrorInfo under their standard type URLs (open standard: googleapis
// google/rpc/status.proto and error_details.proto; gRPC's richer error model).
TEST_F(ServiceTest, InvalidArgumentDetailsAreTheStandardTypes) {
  v1::CertifyRequest req;
  req.mutable_evidence()->mutable_holdout()->set_error_count(5);
  req.mutable_evidence()->mutable_holdout()->set_sample_count(3);
  req.set_failure_probability(2.0);
  v1::CertifyResponse resp;
  const grpc::Status status = Call(req, &resp);
  ASSERT_EQ(status.error_code(), grpc::StatusCode::INVALID_ARGUMENT);
  const auto details = ::riskbound::testing::DetailsOf(status);
  ASSERT_TRUE(details.has_value());
  EXPECT_EQ(details->code(), 3);  // google.rpc.Code INVALID_ARGUMENT
  EXPECT_EQ(details->message(), status.error_message());
  ASSERT_EQ(details->details_size(), 2);
  EXPECT_EQ(details->details(0).type_url(), "type.googleapis.com/google.rpc.BadRequest");
  EXPECT_EQ(details->details(1).type_url(), "type.googleapis.com/google.rpc.ErrorInfo");
  EXPECT_THAT(::riskbound::testing::ViolatedFieldsOf(status),
              ::testing::ElementsAre("failure_probability", "evidence.holdout.error_count"));
  const auto info = ::riskbound::testing::ErrorInfoOf(status);
  ASSERT_TRUE(info.has_value());
  EXPECT_EQ(info->reason(), "INVALID_FIELDS");
  EXPECT_EQ(info->domain(), "riskbound.v1");
  EXPECT_EQ(info->metadata().at("violation_count"), "2");
  EXPECT_EQ(info->metadata().at("listed_violation_count"), "2");
}

TEST_F(ServiceTest, UnknownEnumValueIsNamed) {
  v1::CertifyRequest req;
  req.mutable_evidence()->mutable_holdout()->set_sample_count(10);
  req.set_failure_probability(0.05);
  req.mutable_listed()->add_families(static_cast<v1::BoundFamily>(999));
  v1::CertifyResponse resp;
  const grpc::Status status = Call(req, &resp);
  EXPECT_EQ(status.error_code(), grpc::StatusCode::INVALID_ARGUMENT);
  EXPECT_THAT(status.error_message(), HasSubstr("listed.families[0]: unknown bound family"));
}

// The conversion copies the wire as it is: the hypothesis count stays a
// count (the core resolves it to ln |H|), an unset choice is the core's
// recommended one.
TEST(ConvertTest, CopiesTheWireAsItIs) {
  v1::CertifyRequest req;
  auto* t = req.mutable_evidence()->mutable_training();
  t->set_sample_count(100);
  t->mutable_capacity()->set_hypothesis_count(1000);
  req.set_failure_probability(0.1);
  const auto got = CertifyRequestFromProto(req);
  EXPECT_TRUE(got.refusals.empty());
  EXPECT_EQ(got.request.evidence.training->capacity.hypothesis_count, 1000u);
  EXPECT_FALSE(got.request.evidence.training->capacity.log_hypothesis_count.has_value());
  EXPECT_EQ(got.request.family_choice, core::FamilyChoice::kRecommended);
  EXPECT_EQ(got.request.failure_probability, 0.1);
}

TEST(StatusTest, CodesAreCopied) {
  EXPECT_EQ(ToGrpcStatus(absl::UnavailableError("x")).error_code(), grpc::StatusCode::UNAVAILABLE);
  EXPECT_TRUE(ToGrpcStatus(absl::OkStatus()).ok());
  EXPECT_TRUE(ToGrpcStatus(absl::InternalError("y")).error_details().empty());
}

TEST(ServerTest, BadAddressIsUnavailable) {
  ServerConfig config;
  config.plaintext = true;
  config.listen_address = "256.1.1.1:1";
  EXPECT_THAT(StartServer(config), StatusIs(absl::StatusCode::kUnavailable));
  config.threads = 0;
  EXPECT_THAT(StartServer(config), StatusIs(absl::StatusCode::kInvalidArgument));
}

}  // namespace
}  // namespace riskbound::rpc
