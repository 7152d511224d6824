// The capacity catalogue over the wire: EstimateCapacity against published
// values and the published capacity formulas evaluated independently in Python,
// the error contract with field paths, and Certify taking a model description
// wherever it takes a VC dimension.
#include <cmath>
#include <cstdint>
#include <functional>
#include <memory>
#include <numbers>
#include <string>
#include <vector>

#include "absl/strings/ascii.h"
#include "absl/strings/str_cat.h"
#include "gmock/gmock.h"
#include "grpcpp/create_channel.h"
#include "grpcpp/security/credentials.h"
#include "gtest/gtest.h"
#include "riskbound/v1/riskbound.grpc.pb.h"
#include "service/rpc/capacity_convert.h"
#include "service/rpc/convert.h"
#include "service/rpc/server.h"
#include "tests/testing/loopback_server.h"
#include "tests/rpc/error_details.h"

namespace riskbound::rpc {
namespace {

using ::testing::Contains;
using ::testing::ElementsAre;
using ::testing::HasSubstr;

class CapacityRpcTest : public ::riskbound::testing::LoopbackServerTest {
 protected:

  grpc::Status Estimate(const v1::ModelDescription& model, v1::EstimateCapacityResponse* resp) {
    v1::EstimateCapacityRequest req;
    *req.mutable_model() = model;
    grpc::ClientContext ctx;
    ctx.set_deadline(std::chrono::system_clock::now() + std::chrono::seconds(10));
    return stub_->EstimateCapacity(&ctx, req, resp);
  }

  // The estimate of a model that must be accepted.
  v1::CapacityEstimate Ok(const v1::ModelDescription& model) {
    v1::EstimateCapacityResponse resp;
    const grpc::Status s = Estimate(model, &resp);
    EXPECT_TRUE(s.ok()) << s.error_message();
    EXPECT_FALSE(resp.engine_version().empty());
    return resp.estimate();
  }

  // The field paths of a refused request (INVALID_ARGUMENT with details).
  std::vector<std::string> BadFields(const grpc::Status& s) {
    EXPECT_EQ(s.error_code(), grpc::StatusCode::INVALID_ARGUMENT) << s.error_message();
    return ::riskbound::testing::ViolatedFieldsOf(s);
  }

  std::vector<std::string> EstimateBadFields(const v1::ModelDescription& model) {
    v1::EstimateCapacityResponse resp;
    return BadFields(Estimate(model, &resp));
  }

  grpc::Status Certify(const v1::CertifyRequest& req, v1::CertifyResponse* resp) {
    grpc::ClientContext ctx;
    ctx.set_deadline(std::chrono::system_clock::now() + std::chrono::seconds(10));
    return stub_->Certify(&ctx, req, resp);
  }

};

v1::ModelDescription Model(v1::ModelKind kind) {
  v1::ModelDescription m;
  m.set_kind(kind);
  return m;
}

v1::ModelDescription Widths(v1::ModelKind kind, std::vector<std::uint64_t> widths) {
  v1::ModelDescription m = Model(kind);
  for (std::uint64_t w : widths) m.add_layer_widths(w);
  return m;
}

// Source: Cover (1965); Shalev-Shwartz & Ben-David (2014) Thms 9.2-9.3;
// Burges (1998): halfspaces in R^d have VC dimension d + 1 (d without
// the bias). d = 40 is the belt-jam detector of the demo registry.
TEST_F(CapacityRpcTest, HalfspacesAreDPlusOne) {
  v1::ModelDescription m = Model(v1::MODEL_KIND_HALFSPACE);
  m.set_dimension(40);
  v1::CapacityEstimate e = Ok(m);
  EXPECT_EQ(e.vc_dimension(), 41.0);
  EXPECT_EQ(e.vc_dimension_uint64(), 41u);
  EXPECT_EQ(e.status(), v1::CAPACITY_STATUS_EXACT);
  EXPECT_EQ(e.vc_dimension_lower_bound(), 41.0);
  EXPECT_FALSE(e.exceeds_uint64());
  EXPECT_THAT(e.source(), HasSubstr("Cover (1965)"));
  EXPECT_THAT(e.formula(), HasSubstr("d + 1"));
  m.set_dimension(10);
  m.set_with_bias(false);
  EXPECT_EQ(Ok(m).vc_dimension_uint64(), 10u);  // Source: SSBD (2014) Thm 9.2 (homogeneous)
}

// Source: Shalev-Shwartz & Ben-David (2014) Ch. 6: axis-aligned rectangles in
// the plane have VC dimension 4; boxes in R^d 2d.
TEST_F(CapacityRpcTest, BoxesAreTwoD) {
  v1::ModelDescription m = Model(v1::MODEL_KIND_AXIS_ALIGNED_BOXES);
  m.set_dimension(2);
  EXPECT_EQ(Ok(m).vc_dimension_uint64(), 4u);
  m.set_dimension(7);
  v1::CapacityEstimate e = Ok(m);
  EXPECT_EQ(e.vc_dimension_uint64(), 14u);
  EXPECT_EQ(e.status(), v1::CAPACITY_STATUS_EXACT);
}

// Source: common practice (standard textbook examples): one interval 2,
// a union of k intervals 2k.
TEST_F(CapacityRpcTest, IntervalsAndUnions) {
  EXPECT_EQ(Ok(Model(v1::MODEL_KIND_INTERVAL)).vc_dimension_uint64(), 2u);
  v1::ModelDescription m = Model(v1::MODEL_KIND_UNION_OF_INTERVALS);
  m.set_interval_count(3);
  EXPECT_EQ(Ok(m).vc_dimension_uint64(), 6u);
}

// Source: Anthony & Bartlett (1999) Thm 3.5 (from memory; Dudley 1978): d = 10,
// p = 3 -> C(13, 3) = 286; checked here by
// counting the monomials of total degree <= 3 in 10 variables directly.
TEST_F(CapacityRpcTest, PolynomialThresholdCountsMonomials) {
  std::uint64_t monomials = 0;
  for (int a = 0; a <= 3; ++a) {
    // Exponent vectors of 10 variables with total degree exactly a:
    // C(a + 9, 9), counted by a small recursion.
    std::function<std::uint64_t(int, int)> count = [&](int vars, int left) -> std::uint64_t {
      if (vars == 1) return 1;
      std::uint64_t c = 0;
      for (int e = 0; e <= left; ++e) c += count(vars - 1, left - e);
      return c;
    };
    monomials += count(10, a);
  }
  ASSERT_EQ(monomials, 286u);
  v1::ModelDescription m = Model(v1::MODEL_KIND_POLYNOMIAL_THRESHOLD);
  m.set_dimension(10);
  m.set_degree(3);
  v1::CapacityEstimate e = Ok(m);
  EXPECT_EQ(e.vc_dimension_uint64(), monomials);
  EXPECT_EQ(e.status(), v1::CAPACITY_STATUS_EXACT);
}

// Source: Burges (1998), Theorem 6 (from memory): R = 1, gamma = 0.1, d = 1000 -> 101
// (Burges 1998 gap-tolerant classifiers), an upper bound.
TEST_F(CapacityRpcTest, MarginLinearRow81) {
  v1::ModelDescription m = Model(v1::MODEL_KIND_MARGIN_LINEAR);
  m.set_radius(1.0);
  m.set_margin(0.1);
  m.set_dimension(1000);
  v1::CapacityEstimate e = Ok(m);
  EXPECT_EQ(e.vc_dimension_uint64(), 101u);
  EXPECT_EQ(e.status(), v1::CAPACITY_STATUS_UPPER_BOUND);
  EXPECT_THAT(e.source(), HasSubstr("Burges (1998)"));
}

// Source: the published capacity formulas evaluated independently with exact
// Python integers: stumps, Leboeuf, LeBlanc & Marchand (2020); trees, the
// counting bound (shapes x splits x leaf labels); SSBD (2014) Lemma 10.3;
// Baum & Haussler (1989); Bartlett, Harvey, Liaw & Mehrabian (2019) Thm 7
// (form from memory); Anthony & Bartlett (1999) Thm 8.13 (from memory).
TEST_F(CapacityRpcTest, PublishedFormulaValues) {
  v1::ModelDescription stump = Model(v1::MODEL_KIND_DECISION_STUMP);
  stump.set_feature_count(100);
  EXPECT_EQ(Ok(stump).vc_dimension_uint64(), 9u);  // Leboeuf et al. 2020: l = 100 -> 9 (exact)
  stump.set_feature_count(1000);
  EXPECT_EQ(Ok(stump).vc_dimension_uint64(), 13u);  // Leboeuf et al. 2020: l = 1000 -> 13

  v1::ModelDescription tree = Model(v1::MODEL_KIND_DECISION_TREE);
  tree.set_leaf_count(8);
  tree.set_feature_count(20);
  v1::CapacityEstimate t = Ok(tree);
  EXPECT_EQ(t.vc_dimension_uint64(), 92u);  // counting bound: L = 8, d = 20 -> 92
  EXPECT_EQ(t.status(), v1::CAPACITY_STATUS_UPPER_BOUND);
  EXPECT_EQ(t.vc_dimension_lower_bound(), 8.0);
  tree.set_leaf_count(32);
  tree.set_feature_count(100);
  EXPECT_EQ(Ok(tree).vc_dimension_uint64(), 575u);  // counting bound: L = 32, d = 100 -> 575

  v1::ModelDescription vote = Model(v1::MODEL_KIND_VOTED_ENSEMBLE);
  vote.set_member_count(100);
  vote.set_member_vc_dimension(7);
  EXPECT_EQ(Ok(vote).vc_dimension_uint64(), 24745u);  // SSBD Lemma 10.3 (log2 form)

  v1::ModelDescription net = Model(v1::MODEL_KIND_THRESHOLD_NETWORK);
  net.set_weight_count(1000);
  net.set_unit_count(50);
  EXPECT_EQ(Ok(net).vc_dimension_uint64(), 14173u);  // Baum & Haussler: W = 1000, N = 50

  v1::CapacityEstimate relu = Ok(Widths(v1::MODEL_KIND_RELU_NETWORK, {10, 32, 32, 1}));
  EXPECT_EQ(relu.vc_dimension_uint64(), 46111u);  // BHLM Thm 7: widths 10-32-32-1
  EXPECT_EQ(relu.status(), v1::CAPACITY_STATUS_UPPER_BOUND);
  EXPECT_EQ(relu.vc_dimension_lower_bound(), 11.0);  // d_0 + 1: contains every halfspace
  EXPECT_THAT(relu.formula(), HasSubstr("W = 1441"));  // BHLM Thm 7: W = 1441
  EXPECT_THAT(relu.source(), HasSubstr("Bartlett, Harvey, Liaw & Mehrabian (2019)"));

  v1::ModelDescription sig = Model(v1::MODEL_KIND_SIGMOID_NETWORK);
  sig.set_weight_count(1000);
  sig.set_unit_count(50);
  EXPECT_NEAR(Ok(sig).vc_dimension(), 2.514e9, 0.001e9);  // Anthony & Bartlett 8.13: 2.514e+09
}

// Source: shattering h points needs 2^h hypotheses (Shalev-Shwartz &
// Ben-David 2014 Ch. 6): |H| = 2^20 -> h <= 20, ln |H| = 20 ln 2.
TEST_F(CapacityRpcTest, FiniteClassGivesLogCount) {
  v1::ModelDescription m = Model(v1::MODEL_KIND_FINITE_CLASS);
  m.set_hypothesis_count(1u << 20);
  v1::CapacityEstimate e = Ok(m);
  EXPECT_EQ(e.vc_dimension_uint64(), 20u);
  EXPECT_NEAR(e.log_hypothesis_count(), 20.0 * std::numbers::ln2, 1e-12);
  m.clear_hypothesis_count();
  m.set_description_bits(12.5);
  EXPECT_NEAR(Ok(m).log_hypothesis_count(), 12.5 * std::numbers::ln2, 1e-12);
}

// Source: Burges (1998) for RBF kernels; nearest neighbour stores any labelled set:
// nearest neighbour and RBF kernels
// without a margin shatter any finite set; the answer says what to use.
TEST_F(CapacityRpcTest, InfiniteFamiliesAnswerWithAdvice) {
  for (v1::ModelKind kind :
       {v1::MODEL_KIND_NEAREST_NEIGHBOUR, v1::MODEL_KIND_RBF_KERNEL_NO_MARGIN}) {
    v1::CapacityEstimate e = Ok(Model(kind));
    EXPECT_EQ(e.status(), v1::CAPACITY_STATUS_INFINITE);
    EXPECT_TRUE(e.exceeds_uint64());
    EXPECT_FALSE(e.has_vc_dimension_uint64());
    EXPECT_EQ(e.vc_dimension(), 0.0);
    ASSERT_GE(e.notes_size(), 1);
    EXPECT_THAT(e.notes(0), HasSubstr("hold-out"));
    EXPECT_THAT(e.notes(0), HasSubstr("compression"));
  }
  EXPECT_THAT(Ok(Model(v1::MODEL_KIND_RBF_KERNEL_NO_MARGIN)).notes(0), HasSubstr("margin"));
}

// Overflow is reported, never wrapped: C(d + 3, 3) with d = 2^53 - 1 is about
// 2^159 / 6, far beyond 2^64 (exact arithmetic: (2^53)^3 / 3! > 2^64).
TEST_F(CapacityRpcTest, OverflowIsFlaggedNotWrapped) {
  v1::ModelDescription m = Model(v1::MODEL_KIND_POLYNOMIAL_THRESHOLD);
  m.set_dimension((1ULL << 53) - 1);
  m.set_degree(3);
  v1::CapacityEstimate e = Ok(m);
  EXPECT_TRUE(e.exceeds_uint64());
  EXPECT_FALSE(e.has_vc_dimension_uint64());
  EXPECT_GT(e.vc_dimension(), std::pow(2.0, 159) / 6.0 * 0.999);
  EXPECT_TRUE(std::isfinite(e.vc_dimension()));
}

// Source: common practice (the error contract): malformed or huge
// architectures are refused naming the field, as the request spells it.
TEST_F(CapacityRpcTest, MalformedArchitecturesNameTheField) {
  EXPECT_THAT(EstimateBadFields(Widths(v1::MODEL_KIND_RELU_NETWORK, {784, 0, 100, 1})),
              Contains("model.layer_widths[1]"));
  // A 10-way output is not a binary classifier.
  EXPECT_THAT(EstimateBadFields(Widths(v1::MODEL_KIND_RELU_NETWORK, {784, 300, 100, 10})),
              Contains("model.layer_widths[3]"));
  // Zero computation layers.
  EXPECT_THAT(EstimateBadFields(Widths(v1::MODEL_KIND_RELU_NETWORK, {784})),
              Contains("model.layer_widths"));
  // 10^12 weights: beyond the supported size; 10^12 - 1 is accepted.
  v1::ModelDescription big = Model(v1::MODEL_KIND_RELU_NETWORK);
  big.set_weight_count(1000000000000ULL);
  big.set_unit_count(1000);
  big.set_layer_count(0);
  const std::vector<std::string> fields = EstimateBadFields(big);
  EXPECT_THAT(fields, Contains("model.weight_count"));
  EXPECT_THAT(fields, Contains("model.layer_count"));
  big.set_weight_count(1000000000000ULL - 1);
  big.set_layer_count(10);
  v1::CapacityEstimate e = Ok(big);
  EXPECT_TRUE(e.has_vc_dimension_uint64());
  EXPECT_GT(e.vc_dimension(), 1e12);
  // Widths whose product reaches 10^12 weights.
  EXPECT_THAT(EstimateBadFields(Widths(v1::MODEL_KIND_RELU_NETWORK, {1000000, 1000000, 1})),
              Contains("model.layer_widths"));
  // A field the kind does not use, a missing one, a bad real.
  v1::ModelDescription h = Model(v1::MODEL_KIND_HALFSPACE);
  h.set_degree(2);
  EXPECT_THAT(EstimateBadFields(h), Contains("model.degree"));
  EXPECT_THAT(EstimateBadFields(Model(v1::MODEL_KIND_HALFSPACE)), Contains("model.dimension"));
  v1::ModelDescription margin = Model(v1::MODEL_KIND_MARGIN_LINEAR);
  margin.set_radius(std::nan(""));
  margin.set_margin(-1.0);
  EXPECT_THAT(EstimateBadFields(margin), Contains("model.radius"));
  EXPECT_THAT(EstimateBadFields(margin), Contains("model.margin"));
  // No kind, no model.
  EXPECT_THAT(EstimateBadFields(Model(v1::MODEL_KIND_UNSPECIFIED)), Contains("model.kind"));
  EXPECT_THAT(EstimateBadFields(Model(static_cast<v1::ModelKind>(99))), Contains("model.kind"));
  v1::EstimateCapacityResponse resp;
  grpc::ClientContext ctx;
  // No model at all: its kind is what is missing.
  EXPECT_THAT(BadFields(stub_->EstimateCapacity(&ctx, v1::EstimateCapacityRequest(), &resp)),
              ElementsAre("model.kind"));
}

// --- Certify with a model description ---------------------------------------

v1::CertifyRequest TrainingRequest(std::uint64_t errors, std::uint64_t samples) {
  v1::CertifyRequest req;
  req.mutable_evidence()->mutable_training()->set_error_count(errors);
  req.mutable_evidence()->mutable_training()->set_sample_count(samples);
  req.set_failure_probability(0.05);
  req.mutable_all_applicable();
  return req;
}

v1::Capacity* CapacityOf(v1::CertifyRequest* req) {
  return req->mutable_evidence()->mutable_training()->mutable_capacity();
}

bool AnyNoteHas(const v1::Certificate& c, const std::string& text) {
  for (const std::string& n : c.notes()) {
    if (n.find(text) != std::string::npos) return true;
  }
  return false;
}

// Certify with a model description must equal Certify with the VC dimension
// the catalogue gives for it (the belt-jam detector of the demo registry:
// 270 errors on 9,000 windows, halfspace in R^40 -> h = 41; and a ReLU net).
TEST_F(CapacityRpcTest, CertifyWithModelEqualsExplicitVcDimension) {
  struct Case {
    v1::ModelDescription model;
    std::uint64_t errors, samples;
  };
  v1::ModelDescription halfspace = Model(v1::MODEL_KIND_HALFSPACE);
  halfspace.set_dimension(40);
  const std::vector<Case> cases = {
      {halfspace, 270, 9000},
      {Widths(v1::MODEL_KIND_RELU_NETWORK, {10, 32, 32, 1}), 120, 2000000},
  };
  for (const Case& c : cases) {
    const v1::CapacityEstimate e = Ok(c.model);
    ASSERT_TRUE(e.has_vc_dimension_uint64());
    v1::CertifyRequest with_model = TrainingRequest(c.errors, c.samples);
    *CapacityOf(&with_model)->mutable_model() = c.model;
    v1::CertifyRequest explicit_h = TrainingRequest(c.errors, c.samples);
    CapacityOf(&explicit_h)->set_vc_dimension(e.vc_dimension_uint64());
    v1::CertifyResponse a, b;
    ASSERT_TRUE(Certify(with_model, &a).ok());
    ASSERT_TRUE(Certify(explicit_h, &b).ok());
    ASSERT_EQ(a.certificates_size(), 2);  // vc-additive, vc-relative
    ASSERT_EQ(a.certificates_size(), b.certificates_size());
    for (int i = 0; i < a.certificates_size(); ++i) {
      EXPECT_EQ(a.certificates(i).family(), b.certificates(i).family());
      EXPECT_EQ(a.certificates(i).risk_upper_bound(), b.certificates(i).risk_upper_bound());
      // The model path says which capacity was used; the explicit one does not.
      EXPECT_TRUE(AnyNoteHas(a.certificates(i), "capacity used: VC dimension"));
      EXPECT_TRUE(AnyNoteHas(a.certificates(i),
                             absl::StrCat(e.vc_dimension_uint64())));
      EXPECT_FALSE(AnyNoteHas(b.certificates(i), "capacity used"));
    }
    EXPECT_EQ(a.tightest().risk_upper_bound(), b.tightest().risk_upper_bound());
  }
  // The halfspace note says exact, the ReLU note says upper bound.
  v1::CertifyRequest req = TrainingRequest(270, 9000);
  *CapacityOf(&req)->mutable_model() = halfspace;
  v1::CertifyResponse resp;
  ASSERT_TRUE(Certify(req, &resp).ok());
  EXPECT_TRUE(AnyNoteHas(resp.tightest(), "h = 41 (exact)"));
  EXPECT_TRUE(AnyNoteHas(resp.tightest(), "Cover (1965)"));
}

// A finite class description equals hypothesis_count (the label-rules model
// of the demo registry: 2^20 rule lists, 96 errors on 12,000 labels).
TEST_F(CapacityRpcTest, CertifyWithFiniteClassEqualsHypothesisCount) {
  v1::ModelDescription m = Model(v1::MODEL_KIND_FINITE_CLASS);
  m.set_hypothesis_count(1u << 20);
  v1::CertifyRequest with_model = TrainingRequest(96, 12000);
  *CapacityOf(&with_model)->mutable_model() = m;
  v1::CertifyRequest explicit_n = TrainingRequest(96, 12000);
  CapacityOf(&explicit_n)->set_hypothesis_count(1u << 20);
  v1::CertifyResponse a, b;
  ASSERT_TRUE(Certify(with_model, &a).ok());
  ASSERT_TRUE(Certify(explicit_n, &b).ok());
  ASSERT_EQ(a.certificates_size(), 2);  // occam-hoeffding, occam-kl
  for (int i = 0; i < a.certificates_size(); ++i) {
    EXPECT_EQ(a.certificates(i).risk_upper_bound(), b.certificates(i).risk_upper_bound());
    EXPECT_TRUE(AnyNoteHas(a.certificates(i), "capacity used: ln |H|"));
  }
}

// Refusals inside Certify name the path under the training capacity.
TEST_F(CapacityRpcTest, CertifyRefusesBadOrInfiniteModelsWithPaths) {
  v1::CertifyResponse resp;
  v1::CertifyRequest req = TrainingRequest(10, 1000);
  *CapacityOf(&req)->mutable_model() = Widths(v1::MODEL_KIND_RELU_NETWORK, {784, 0, 1});
  const std::vector<std::string> widths_fields = BadFields(Certify(req, &resp));
  EXPECT_THAT(widths_fields, Contains("evidence.training.capacity.model.layer_widths[1]"));
  // The model's own violation explains the missing capacity: no second one.
  EXPECT_THAT(widths_fields, ::testing::Not(Contains("evidence.training.capacity")));
  EXPECT_EQ(widths_fields.size(), 1u);

  *CapacityOf(&req)->mutable_model() = Model(v1::MODEL_KIND_UNSPECIFIED);
  EXPECT_THAT(BadFields(Certify(req, &resp)), Contains("evidence.training.capacity.model.kind"));

  *CapacityOf(&req)->mutable_model() = Model(v1::MODEL_KIND_NEAREST_NEIGHBOUR);
  grpc::Status s = Certify(req, &resp);
  EXPECT_THAT(BadFields(s), Contains("evidence.training.capacity.model"));
  EXPECT_THAT(s.error_message(), HasSubstr("infinite VC dimension"));
  EXPECT_THAT(s.error_message(), HasSubstr("hold-out"));

  v1::ModelDescription huge = Model(v1::MODEL_KIND_POLYNOMIAL_THRESHOLD);
  huge.set_dimension((1ULL << 53) - 1);
  huge.set_degree(3);
  *CapacityOf(&req)->mutable_model() = huge;
  s = Certify(req, &resp);
  EXPECT_THAT(BadFields(s), Contains("evidence.training.capacity.model"));
  EXPECT_THAT(s.error_message(), HasSubstr("exceeds 2^64"));
  EXPECT_THAT(s.error_message(), HasSubstr("hold-out"));

  // Every violation at once: the model and the counts.
  req = TrainingRequest(5000, 1000);
  *CapacityOf(&req)->mutable_model() = Model(v1::MODEL_KIND_HALFSPACE);
  const std::vector<std::string> fields = BadFields(Certify(req, &resp));
  EXPECT_THAT(fields, Contains("evidence.training.capacity.model.dimension"));
  EXPECT_THAT(fields, Contains("evidence.training.error_count"));
}

// Source: the conversion table of capacity_convert.cc, checked both ways for
// every kind (a kind lost in conversion would change the family estimated).
TEST(CapacityConvertTest, EveryKindRoundTrips) {
  const google::protobuf::EnumDescriptor* kinds = v1::ModelKind_descriptor();
  for (int i = 0; i < kinds->value_count(); ++i) {
    const auto wire = static_cast<v1::ModelKind>(kinds->value(i)->number());
    if (wire == v1::MODEL_KIND_UNSPECIFIED) continue;
    v1::ModelDescription in = Model(wire);
    in.set_dimension(3);
    in.add_layer_widths(4);
    Refusals refusals;
    const core::ModelDescription core_model = ModelDescriptionFromProto(in, "model", &refusals);
    ASSERT_TRUE(refusals.empty());
    ASSERT_TRUE(core_model.kind.has_value()) << kinds->value(i)->name();
    // The core's name of the kind is the wire name without the prefix.
    EXPECT_EQ("MODEL_KIND_" + absl::AsciiStrToUpper(core::ModelKindName(*core_model.kind)),
              kinds->value(i)->name());
    v1::ModelDescription back;
    ModelDescriptionToProto(core_model, &back);
    EXPECT_EQ(back.SerializeAsString(), in.SerializeAsString());
  }
}

}  // namespace
}  // namespace riskbound::rpc
