// Capacity from the data over the wire: evidence.relabel through Certify and
// Gate (the copy of every field and enum, the heuristic flag, the size cap on
// draws) and FitEffectiveVcDimension (the copy both ways, refusals).
#include <chrono>
#include <cmath>
#include <string>
#include <vector>

#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "riskbound/v1/riskbound.grpc.pb.h"
#include "service/core/effective_vc.h"
#include "service/core/limits.h"
#include "tests/rpc/error_details.h"
#include "tests/testing/loopback_server.h"

namespace riskbound::rpc {
namespace {

using ::testing::Contains;
using ::testing::HasSubstr;

class RelabelRpcTest : public ::riskbound::testing::LoopbackServerTest {
 protected:
  grpc::Status Certify(const v1::CertifyRequest& req, v1::CertifyResponse* resp) {
    grpc::ClientContext ctx;
    ctx.set_deadline(std::chrono::system_clock::now() + std::chrono::seconds(10));
    return stub_->Certify(&ctx, req, resp);
  }
};

v1::CertifyRequest HalfFlip(v1::RelabelTraining training) {
  v1::CertifyRequest req;
  req.set_failure_probability(0.05);
  v1::RelabelEvidence* r = req.mutable_evidence()->mutable_relabel();
  r->set_error_count(12);
  r->set_sample_count(400);
  r->set_scheme(v1::RELABEL_SCHEME_HALF_FLIP);
  r->set_training(training);
  v1::RelabelDraw* d = r->add_draws();
  d->set_flipped_half_error_count(40);
  d->set_kept_half_error_count(10);
  return req;
}

// Source: the maximal-discrepancy bound k/m + D + 3 sqrt(ln(1/delta)/(2m))
// (Bartlett, Boucheron & Lugosi 2002; constant derived with McDiarmid 1989 in
// service/core/rademacher.cc), evaluated here.
TEST_F(RelabelRpcTest, HalfFlipDrawsAreCopiedAndCertified) {
  v1::CertifyResponse resp;
  const grpc::Status s = Certify(HalfFlip(v1::RELABEL_TRAINING_EXACT), &resp);
  ASSERT_TRUE(s.ok()) << s.error_message();
  const v1::Certificate& c = resp.tightest();
  EXPECT_EQ(c.family(), v1::BOUND_FAMILY_MAXIMAL_DISCREPANCY);
  EXPECT_EQ(c.family_name(), "maximal-discrepancy");
  const double want = 12.0 / 400 + 30.0 / 200 + 3.0 * std::sqrt(std::log(20.0) / 800.0);
  EXPECT_NEAR(c.risk_upper_bound(), want, 1e-12);
  EXPECT_FALSE(c.heuristic());
}

TEST_F(RelabelRpcTest, ApproximateTrainingComesBackHeuristic) {
  v1::CertifyResponse resp;
  const grpc::Status s = Certify(HalfFlip(v1::RELABEL_TRAINING_APPROXIMATE), &resp);
  ASSERT_TRUE(s.ok()) << s.error_message();
  EXPECT_TRUE(resp.tightest().heuristic());
  EXPECT_THAT(resp.tightest().notes(), Contains(HasSubstr("HEURISTIC, NOT A BOUND")));
}

TEST_F(RelabelRpcTest, UnknownEnumsAndOversizedDrawsAreNamed) {
  v1::CertifyRequest req = HalfFlip(v1::RELABEL_TRAINING_EXACT);
  req.mutable_evidence()->mutable_relabel()->set_scheme(static_cast<v1::RelabelScheme>(77));
  req.mutable_evidence()->mutable_relabel()->set_training(static_cast<v1::RelabelTraining>(9));
  v1::CertifyResponse resp;
  grpc::Status s = Certify(req, &resp);
  EXPECT_EQ(s.error_code(), grpc::StatusCode::INVALID_ARGUMENT);
  std::vector<std::string> fields = ::riskbound::testing::ViolatedFieldsOf(s);
  EXPECT_THAT(fields, Contains("evidence.relabel.scheme"));
  EXPECT_THAT(fields, Contains("evidence.relabel.training"));

  req = HalfFlip(v1::RELABEL_TRAINING_EXACT);
  for (std::size_t i = 0; i < core::kMaxRelabelDrawCount; ++i) {
    req.mutable_evidence()->mutable_relabel()->add_draws();
  }
  s = Certify(req, &resp);
  EXPECT_EQ(s.error_code(), grpc::StatusCode::INVALID_ARGUMENT);
  EXPECT_THAT(::riskbound::testing::ViolatedFieldsOf(s), Contains("evidence.relabel.draws"));
}

// Source: the curve itself (xi = Phi(n/5) at n = 3..150 returns 5).
TEST_F(RelabelRpcTest, EffectiveVcFitRoundTrip) {
  v1::FitEffectiveVcDimensionRequest req;
  for (int n = 3; n <= 150; n += 3) {
    v1::DeviationPoint* p = req.add_design_points();
    p->set_half_sample_count(n);
    p->add_deviations(core::VllPhi(n / 5.0));
  }
  req.set_training(v1::RELABEL_TRAINING_EXACT);
  req.set_bootstrap_resample_count(5);
  v1::FitEffectiveVcDimensionResponse resp;
  grpc::ClientContext ctx;
  grpc::Status s = stub_->FitEffectiveVcDimension(&ctx, req, &resp);
  ASSERT_TRUE(s.ok()) << s.error_message();
  EXPECT_NEAR(resp.effective_vc_dimension(), 5.0, 1e-4);
  EXPECT_EQ(resp.points_size(), 50);
  EXPECT_EQ(resp.bootstrap_resample_count(), 5u);
  EXPECT_THAT(resp.notes(0), HasSubstr("heuristic, not a bound"));
  EXPECT_FALSE(resp.engine_version().empty());

  req.set_training(v1::RELABEL_TRAINING_UNSPECIFIED);
  req.mutable_design_points(1)->set_deviations(0, -0.5);
  grpc::ClientContext ctx2;
  s = stub_->FitEffectiveVcDimension(&ctx2, req, &resp);
  EXPECT_EQ(s.error_code(), grpc::StatusCode::INVALID_ARGUMENT);
  EXPECT_THAT(::riskbound::testing::ViolatedFieldsOf(s),
              Contains("design_points[1].deviations[0]"));
  EXPECT_THAT(::riskbound::testing::ViolatedFieldsOf(s), Contains("training"));
}

}  // namespace
}  // namespace riskbound::rpc
