// SelectStructure and PlanSamples over a loopback channel to an in-process
// server on port 0: values against published worked values and independent
// Python computations (Vapnik 1998, Blumer et al. 1989, Clopper & Pearson
// 1934, SRM weights 6/(pi^2 k^2)), a hand computation of Vapnik's bound, and
// Certify (an independent path through the service); unreachable targets; INVALID_ARGUMENT naming the
// wire field paths.
#include <chrono>
#include <cmath>
#include <memory>
#include <numbers>
#include <set>
#include <string>
#include <vector>

#include "absl/strings/match.h"
#include "gmock/gmock.h"
#include "google/protobuf/descriptor.h"
#include "grpcpp/create_channel.h"
#include "grpcpp/security/credentials.h"
#include "gtest/gtest.h"
#include "riskbound/v1/riskbound.grpc.pb.h"
#include "service/rpc/server.h"
#include "tests/rpc/error_details.h"
#include "tests/testing/fixture.h"
#include "tests/testing/loopback_server.h"

namespace riskbound::rpc {
namespace {

using ::riskbound::testing::Num;
using ::riskbound::testing::ReadFixture;
using ::testing::ElementsAre;
using ::testing::HasSubstr;
using ::testing::Not;
using ::testing::UnorderedElementsAreArray;

// Vapnik's additive VC bound, conservative form with +1/m, written out here
// from Vapnik (1998) Ch. 4 and Burges (1998) eq. (3) (+1/m: Vapnik 1998 Thm 4.1,
// from memory):
//   R_emp + sqrt((h (ln(2m/h) + 1) - ln(eta/4)) / m) + 1/m, clipped to 1.
double HandVcBound(double errors, double m, double h, double eta) {
  const double conf = std::sqrt((h * (std::log(2 * m / h) + 1) - std::log(eta / 4)) / m) + 1 / m;
  return std::min(1.0, errors / m + conf);
}

class SelectPlanTest : public ::riskbound::testing::LoopbackServerTest {
 protected:

  grpc::Status Select(const v1::SelectStructureRequest& req, v1::SelectStructureResponse* resp) {
    return stub_->SelectStructure(::riskbound::testing::CallContext().get(), req, resp);
  }
  grpc::Status Plan(const v1::PlanSamplesRequest& req, v1::PlanSamplesResponse* resp) {
    return stub_->PlanSamples(::riskbound::testing::CallContext().get(), req, resp);
  }

  // The upper bound Certify reports for training evidence under one family.
  double CertifyTraining(std::uint64_t errors, std::uint64_t m, const v1::Capacity& capacity,
                         v1::BoundFamily family, double delta) {
    v1::CertifyRequest req;
    auto* t = req.mutable_evidence()->mutable_training();
    t->set_error_count(errors);
    t->set_sample_count(m);
    *t->mutable_capacity() = capacity;
    req.set_failure_probability(delta);
    req.mutable_listed()->add_families(family);
    v1::CertifyResponse resp;
    const grpc::Status status = stub_->Certify(::riskbound::testing::CallContext().get(), req, &resp);
    EXPECT_TRUE(status.ok()) << status.error_message();
    return status.ok() ? resp.tightest().risk_upper_bound() : -1.0;
  }

  double CertifyHoldout(std::uint64_t errors, std::uint64_t n, double delta) {
    v1::CertifyRequest req;
    req.mutable_evidence()->mutable_holdout()->set_error_count(errors);
    req.mutable_evidence()->mutable_holdout()->set_sample_count(n);
    req.set_failure_probability(delta);
    req.mutable_listed()->add_families(v1::BOUND_FAMILY_HOLDOUT_EXACT_BINOMIAL);
    v1::CertifyResponse resp;
    const grpc::Status status = stub_->Certify(::riskbound::testing::CallContext().get(), req, &resp);
    EXPECT_TRUE(status.ok()) << status.error_message();
    return status.ok() ? resp.tightest().risk_upper_bound() : -1.0;
  }

  // The field paths of an INVALID_ARGUMENT answer, from its structured details.
  static std::vector<std::string> Fields(const grpc::Status& status) {
    EXPECT_EQ(status.error_code(), grpc::StatusCode::INVALID_ARGUMENT);
    if (!::riskbound::testing::BadRequestOf(status).has_value()) {
      ADD_FAILURE() << "no field-violation details: " << status.error_message();
    }
    return ::riskbound::testing::ViolatedFieldsOf(status);
  }

};

v1::StructureCandidate* AddVc(v1::SelectStructureRequest* req, const std::string& id,
                              std::uint64_t errors, std::uint64_t m, std::uint64_t h) {
  v1::StructureCandidate* c = req->add_structure();
  c->set_id(id);
  c->set_error_count(errors);
  c->set_sample_count(m);
  c->mutable_capacity()->set_vc_dimension(h);
  return c;
}

// ---------------------------------------------------------------- selection

// A structure whose choice is plain by hand (m = 10000, delta = .05 spread
// uniformly, so eta = .05/3 each). Source: Vapnik (1998), computed
// in HandVcBound: the small class underfits (.20 + .096 = .296), the middle
// one balances (.05 + .188 = .238), the large one pays too much capacity
// (0 + .81 = .81). The middle one is chosen; the chosen bound equals a Certify
// call at delta_k = .05/3 (an independent path through the service).
TEST_F(SelectPlanTest, ChoiceKnownByHandAndEqualToCertify) {
  v1::SelectStructureRequest req;
  AddVc(&req, "small", 2000, 10000, 10);
  AddVc(&req, "middle", 500, 10000, 50);
  AddVc(&req, "large", 0, 10000, 2000);
  req.set_family(v1::BOUND_FAMILY_VC_ADDITIVE);
  req.set_failure_probability(0.05);
  req.set_delta_spread(v1::DELTA_SPREAD_UNIFORM);
  v1::SelectStructureResponse resp;
  const grpc::Status status = Select(req, &resp);
  ASSERT_TRUE(status.ok()) << status.error_message();
  ASSERT_EQ(resp.candidates_size(), 3);
  EXPECT_EQ(resp.chosen_id(), "middle");
  EXPECT_EQ(resp.chosen_index(), 1u);
  EXPECT_FALSE(resp.fragile());
  EXPECT_EQ(resp.within_tolerance_ids_size(), 0);
  EXPECT_DOUBLE_EQ(resp.fragility_tolerance(), 0.01);  // the documented default
  EXPECT_EQ(resp.family_name(), "vc-additive");
  EXPECT_EQ(resp.capacity_measure(), "vc_dimension");
  EXPECT_NEAR(resp.spent_failure_probability(), 0.05, 1e-15);
  EXPECT_THAT(resp.delta_rule(), HasSubstr("union bound over 3 candidates"));
  EXPECT_EQ(resp.cautions_size(), 3);
  EXPECT_FALSE(resp.engine_version().empty());
  const double errors[] = {2000, 500, 0};
  const double h[] = {10, 50, 2000};
  for (int i = 0; i < 3; ++i) {
    const v1::CandidateBound& c = resp.candidates(i);
    EXPECT_DOUBLE_EQ(c.delta_weight(), 1.0 / 3.0);
    EXPECT_DOUBLE_EQ(c.failure_probability(), 0.05 / 3.0);
    EXPECT_DOUBLE_EQ(c.capacity(), h[i]);
    EXPECT_DOUBLE_EQ(c.empirical_risk(), errors[i] / 10000);
    EXPECT_NEAR(c.risk_upper_bound(), HandVcBound(errors[i], 10000, h[i], 0.05 / 3), 1e-12)
        << c.id();
    EXPECT_NEAR(c.penalty(), c.risk_upper_bound() - c.empirical_risk(), 1e-15);
    EXPECT_FALSE(c.vacuous());
  }
  EXPECT_NEAR(resp.candidates(0).risk_upper_bound(), 0.296, 0.001);
  EXPECT_NEAR(resp.candidates(1).risk_upper_bound(), 0.238, 0.001);
  EXPECT_NEAR(resp.candidates(2).risk_upper_bound(), 0.81, 0.01);
  v1::Capacity cap;
  cap.set_vc_dimension(50);
  EXPECT_DOUBLE_EQ(resp.candidates(1).risk_upper_bound(),
                   CertifyTraining(500, 10000, cap, v1::BOUND_FAMILY_VC_ADDITIVE, 0.05 / 3));
}

// Source: Vapnik (1998) / Burges (1998) eq. (3) evaluated independently in
// Python (R_emp = .05, h = 100, m = 10000, eta = .05 -> 0.301936 with +1/m):
// a one-candidate structure with caller weight 1 spends the whole delta on
// it. Hand/Python evaluation: the inverse-square weights
// 6/(pi^2 k^2) are 0.6079, 0.1520, 0.0675 for k = 1..3.
TEST_F(SelectPlanTest, CallerWeightsAndInverseSquareWeights) {
  v1::SelectStructureRequest req;
  AddVc(&req, "only", 500, 10000, 100);
  req.set_family(v1::BOUND_FAMILY_VC_ADDITIVE);
  req.set_failure_probability(0.05);
  req.set_delta_spread(v1::DELTA_SPREAD_CALLER_WEIGHTS);
  req.add_weights(1.0);
  v1::SelectStructureResponse resp;
  ASSERT_TRUE(Select(req, &resp).ok());
  EXPECT_NEAR(resp.candidates(0).risk_upper_bound(), 0.301936, 5e-7);
  EXPECT_DOUBLE_EQ(resp.candidates(0).failure_probability(), 0.05);

  v1::SelectStructureRequest inv;
  AddVc(&inv, "k1", 900, 10000, 5);
  AddVc(&inv, "k2", 600, 10000, 20);
  AddVc(&inv, "k3", 550, 10000, 80);
  inv.set_family(v1::BOUND_FAMILY_VC_ADDITIVE);
  inv.set_failure_probability(0.05);  // delta_spread left unset: inverse square
  ASSERT_TRUE(Select(inv, &resp).ok());
  const double expected[] = {0.6079, 0.1520, 0.0675};
  for (int k = 0; k < 3; ++k) {
    EXPECT_NEAR(resp.candidates(k).delta_weight(), expected[k], 5e-5);
    EXPECT_NEAR(resp.candidates(k).delta_weight(), 6 / (std::numbers::pi * std::numbers::pi *
                                                        (k + 1) * (k + 1)), 1e-15);
    EXPECT_NEAR(resp.candidates(k).risk_upper_bound(),
                HandVcBound(resp.candidates(k).empirical_risk() * 10000, 10000,
                            resp.candidates(k).capacity(), 0.05 * expected[k]),
                1e-4);  // the expected weights carry 4 decimals
  }
  EXPECT_THAT(resp.delta_rule(), HasSubstr("6/(pi^2 k^2)"));
  EXPECT_EQ(resp.delta_spread(), v1::DELTA_SPREAD_INVERSE_SQUARE);
  EXPECT_DOUBLE_EQ(resp.requested_failure_probability(), 0.05);
  EXPECT_NEAR(resp.spent_failure_probability(),
              0.05 * (expected[0] + expected[1] + expected[2]), 5e-6);
}

// By hand: two identical candidates have identical bounds; the tie goes to the
// earlier (smaller-capacity) one and the choice is fragile, naming the other.
TEST_F(SelectPlanTest, TieGoesToEarlierAndIsFragile) {
  v1::SelectStructureRequest req;
  AddVc(&req, "first", 300, 8000, 30);
  AddVc(&req, "twin", 300, 8000, 30);
  AddVc(&req, "big", 0, 8000, 3000);
  req.set_family(v1::BOUND_FAMILY_VC_ADDITIVE);
  req.set_failure_probability(0.1);
  req.set_delta_spread(v1::DELTA_SPREAD_UNIFORM);
  req.set_fragility_tolerance(0.0);
  v1::SelectStructureResponse resp;
  ASSERT_TRUE(Select(req, &resp).ok());
  EXPECT_EQ(resp.chosen_id(), "first");
  EXPECT_TRUE(resp.fragile());
  EXPECT_THAT(resp.within_tolerance_ids(), ElementsAre("twin"));
  EXPECT_DOUBLE_EQ(resp.fragility_tolerance(), 0.0);
}

// A capacity given as a model description goes through the catalogue: a
// halfspace with bias in R^9 has VC dimension 10 (Burges 1998;
// Shalev-Shwartz & Ben-David 2014 Thm 9.3), so it selects exactly as
// vc_dimension 10 does. A hypothesis count is used as ln |H| by the Occam
// families (capacity_measure says so).
TEST_F(SelectPlanTest, ModelDescriptionAndFiniteClassCapacities) {
  v1::SelectStructureRequest by_model;
  v1::StructureCandidate* c = by_model.add_structure();
  c->set_id("linear");
  c->set_error_count(400);
  c->set_sample_count(5000);
  c->mutable_capacity()->mutable_model()->set_kind(v1::MODEL_KIND_HALFSPACE);
  c->mutable_capacity()->mutable_model()->set_dimension(9);
  by_model.set_family(v1::BOUND_FAMILY_VC_ADDITIVE);
  by_model.set_failure_probability(0.05);
  v1::SelectStructureResponse resp;
  const grpc::Status status = Select(by_model, &resp);
  ASSERT_TRUE(status.ok()) << status.error_message();
  EXPECT_DOUBLE_EQ(resp.candidates(0).capacity(), 10.0);
  EXPECT_GE(resp.candidates(0).notes_size(), 1);  // which capacity the catalogue gave
  EXPECT_NEAR(resp.candidates(0).risk_upper_bound(),
              HandVcBound(400, 5000, 10, 0.05 * 6 / (std::numbers::pi * std::numbers::pi)),
              1e-12);

  v1::SelectStructureRequest finite;
  v1::StructureCandidate* f = finite.add_structure();
  f->set_id("rules-1k");
  f->set_error_count(250);
  f->set_sample_count(5000);
  f->mutable_capacity()->set_hypothesis_count(1000);
  finite.set_family(v1::BOUND_FAMILY_OCCAM_KL);
  finite.set_failure_probability(0.05);
  ASSERT_TRUE(Select(finite, &resp).ok());
  EXPECT_EQ(resp.capacity_measure(), "log_hypothesis_count");
  EXPECT_NEAR(resp.candidates(0).capacity(), std::log(1000.0), 1e-12);
}

// Heuristic mode over the wire: the request's heuristic flag and each
// candidate's effective_vc_dimension reach the core, and the answer comes back
// labelled (heuristic, capacity_measure, first note). Source: HandVcBound
// above (the additive VC formula written out, with a real h = h_hat) at the
// uniform share .06/3.
TEST_F(SelectPlanTest, HeuristicRankingByEffectiveVcIsLabelled) {
  v1::SelectStructureRequest req;
  req.set_family(v1::BOUND_FAMILY_VC_ADDITIVE);
  req.set_failure_probability(0.06);
  req.set_delta_spread(v1::DELTA_SPREAD_UNIFORM);
  req.set_heuristic(true);
  const struct {
    const char* id;
    std::uint64_t errors;
    double h_hat;
  } fitted[] = {{"depth-1", 420, 3.1}, {"depth-2", 300, 7.4}, {"depth-3", 240, 15.2}};
  for (const auto& f : fitted) {
    v1::StructureCandidate* c = req.add_structure();
    c->set_id(f.id);
    c->set_error_count(f.errors);
    c->set_sample_count(2000);
    c->set_effective_vc_dimension(f.h_hat);
  }
  v1::SelectStructureResponse resp;
  const grpc::Status status = Select(req, &resp);
  ASSERT_TRUE(status.ok()) << status.error_message();
  EXPECT_TRUE(resp.heuristic());
  EXPECT_EQ(resp.capacity_measure(), "effective_vc_dimension");
  ASSERT_GE(resp.notes_size(), 1);
  EXPECT_THAT(resp.notes(0), ::testing::StartsWith("HEURISTIC, NOT A BOUND"));
  EXPECT_THAT(resp.delta_rule(), HasSubstr("no union bound is claimed"));
  ASSERT_EQ(resp.candidates_size(), 3);
  int best = 0;
  double best_score = 2.0;
  for (int i = 0; i < 3; ++i) {
    const double hand =
        HandVcBound(static_cast<double>(fitted[i].errors), 2000.0, fitted[i].h_hat, 0.02);
    EXPECT_DOUBLE_EQ(resp.candidates(i).capacity(), fitted[i].h_hat);
    EXPECT_NEAR(resp.candidates(i).risk_upper_bound(), hand, 1e-12) << i;
    if (hand < best_score) {
      best_score = hand;
      best = i;
    }
  }
  EXPECT_EQ(resp.chosen_index(), static_cast<std::uint32_t>(best));
  EXPECT_EQ(resp.chosen_id(), "depth-2");

  // The same candidates without the flag: refused, naming every h_hat (and
  // the capacity a certified selection needs); a certified answer is never
  // marked heuristic.
  req.set_heuristic(false);
  EXPECT_THAT(Fields(Select(req, &resp)),
              ElementsAre("structure[0].effective_vc_dimension", "structure[0].capacity",
                          "structure[1].effective_vc_dimension", "structure[1].capacity",
                          "structure[2].effective_vc_dimension", "structure[2].capacity"));
  v1::SelectStructureRequest certified;
  AddVc(&certified, "a", 420, 2000, 3);
  certified.set_family(v1::BOUND_FAMILY_VC_ADDITIVE);
  certified.set_failure_probability(0.05);
  ASSERT_TRUE(Select(certified, &resp).ok());
  EXPECT_FALSE(resp.heuristic());
  // Heuristic mode with an Occam family, and with a capacity given.
  req.set_heuristic(true);
  req.set_family(v1::BOUND_FAMILY_OCCAM_KL);
  req.mutable_structure(1)->mutable_capacity()->set_vc_dimension(7);
  EXPECT_THAT(Fields(Select(req, &resp)), UnorderedElementsAreArray(std::vector<std::string>{
                                              "family", "structure[1].capacity"}));
}

// The heuristic never reaches a certificate or a gate verdict: no request of
// any method but SelectStructure can carry an effective VC dimension (walks
// every field reachable from each method's input message).
TEST(HeuristicReachTest, OnlySelectStructureTakesAnEffectiveVcDimension) {
  // riskbound.proto declares only the service: refer to its descriptor table
  // so that the linker keeps it in the pool (as enums_rpc_test does).
  const void* volatile keep = &descriptor_table_riskbound_2fv1_2friskbound_2eproto;
  EXPECT_NE(keep, nullptr);
  const google::protobuf::ServiceDescriptor* service =
      google::protobuf::DescriptorPool::generated_pool()->FindServiceByName(
          v1::RiskBound::service_full_name());
  ASSERT_NE(service, nullptr);
  std::vector<std::string> takers;
  for (int i = 0; i < service->method_count(); ++i) {
    const google::protobuf::MethodDescriptor* method = service->method(i);
    std::vector<const google::protobuf::Descriptor*> todo = {method->input_type()};
    std::set<const google::protobuf::Descriptor*> seen;
    bool takes = false;
    while (!todo.empty()) {
      const google::protobuf::Descriptor* d = todo.back();
      todo.pop_back();
      if (!seen.insert(d).second) continue;
      for (int f = 0; f < d->field_count(); ++f) {
        const google::protobuf::FieldDescriptor* field = d->field(f);
        if (field->name() == "effective_vc_dimension") takes = true;
        if (field->message_type() != nullptr) todo.push_back(field->message_type());
      }
    }
    if (takes) takers.push_back(method->name());
  }
  EXPECT_THAT(takers, ElementsAre("SelectStructure"));
  // The walk covered the methods that make certificates and verdicts.
  std::vector<std::string> walked;
  for (int i = 0; i < service->method_count(); ++i) walked.push_back(service->method(i)->name());
  EXPECT_THAT(walked, ::testing::IsSupersetOf(
                          {"Certify", "Gate", "ScoreRegistry", "PlanSamples", "SelectStructure"}));
}

TEST_F(SelectPlanTest, InvalidStructureNamesEveryWireField) {
  v1::SelectStructureRequest req;
  AddVc(&req, "a", 20, 10, 5);                      // errors exceed samples
  req.add_structure()->set_id("b");                 // no counts, no capacity
  req.mutable_structure(1)->set_sample_count(100);
  AddVc(&req, "a", 1, 100, 3);                      // duplicate id, capacity decreases
  req.set_family(v1::BOUND_FAMILY_UNSPECIFIED);
  req.set_failure_probability(0.0);
  req.add_weights(0.5);                             // weights without caller spread
  v1::SelectStructureResponse resp;
  const grpc::Status status = Select(req, &resp);
  EXPECT_THAT(status.error_message(), HasSubstr("structure[1].capacity: required"));
  EXPECT_THAT(Fields(status),
              UnorderedElementsAreArray(std::vector<std::string>{
                  "structure[1].capacity", "family", "failure_probability",
                  "structure[0].error_count", "structure[2].id", "weights"}));

  // With a family, the nesting order is checked too.
  v1::SelectStructureRequest nested;
  AddVc(&nested, "wide", 1, 100, 8);
  AddVc(&nested, "narrow", 1, 100, 3);
  nested.set_family(v1::BOUND_FAMILY_VC_ADDITIVE);
  nested.set_failure_probability(0.05);
  nested.set_delta_spread(v1::DELTA_SPREAD_CALLER_WEIGHTS);
  nested.add_weights(0.7);
  nested.add_weights(0.7);
  EXPECT_THAT(Fields(Select(nested, &resp)),
              UnorderedElementsAreArray(std::vector<std::string>{
                  "structure[1].capacity.vc_dimension", "weights"}));

  v1::SelectStructureRequest wrong_kind;
  AddVc(&wrong_kind, "x", 1, 100, 3)->mutable_capacity()->set_hypothesis_count(0);
  wrong_kind.set_family(v1::BOUND_FAMILY_HOLDOUT_EXACT_BINOMIAL);
  wrong_kind.set_failure_probability(0.05);
  wrong_kind.set_fragility_tolerance(-1);
  EXPECT_THAT(Fields(Select(wrong_kind, &resp)),
              UnorderedElementsAreArray(std::vector<std::string>{
                  "structure[0].capacity.hypothesis_count", "family", "fragility_tolerance"}));

  v1::SelectStructureRequest empty;
  empty.set_family(v1::BOUND_FAMILY_VC_ADDITIVE);
  empty.set_failure_probability(0.05);
  empty.set_delta_spread(static_cast<v1::DeltaSpread>(9));
  EXPECT_THAT(Fields(Select(empty, &resp)),
              UnorderedElementsAreArray(std::vector<std::string>{"structure", "delta_spread"}));
}

// ---------------------------------------------------------------- planning

v1::PlanSamplesRequest Holdout(double target, double expected, double delta) {
  v1::PlanSamplesRequest req;
  req.mutable_holdout()->set_target_risk(target);
  req.mutable_holdout()->set_expected_risk(expected);
  req.mutable_holdout()->set_failure_probability(delta);
  return req;
}

// Source: independent Python computation (scipy.stats.beta.isf Clopper &
// Pearson 1934 limits, scipy.stats.binom.cdf, linear scan over n):
//   eps = .01, delta = .05, no errors: n = 299 (0.99^299 = .04954 <= .05 <
//       0.99^298; Hanley & Lippman-Hand 1983, the rule of three says 300);
//   eps = .05, p = .03, delta = .05: n = 410 (bound 0.049939);
//   the same at 80% pass probability: n = 601, P(pass) = 0.8002.
// The boundary is checked through Certify: <= eps at n, > eps at n - 1.
TEST_F(SelectPlanTest, HoldoutPlansWorkedValues) {
  v1::PlanSamplesResponse resp;
  ASSERT_TRUE(Plan(Holdout(0.01, 0.0, 0.05), &resp).ok());
  EXPECT_TRUE(resp.reachable());
  EXPECT_EQ(resp.sample_count(), 299u);
  EXPECT_EQ(resp.holdout().zero_failure_sample_count(), 299u);
  EXPECT_EQ(resp.holdout().tolerated_error_count(), 0u);
  // No errors expected: no sawtooth, no "ceil(0 n)" in the rule.
  EXPECT_THAT(resp.rule(), HasSubstr("with no errors is <= 0.01"));
  EXPECT_THAT(resp.rule(), Not(HasSubstr("ceil(")));
  EXPECT_LE(CertifyHoldout(0, 299, 0.05), 0.01);
  EXPECT_GT(CertifyHoldout(0, 298, 0.05), 0.01);
  EXPECT_EQ(resp.cautions_size(), 3);

  v1::PlanSamplesRequest req = Holdout(0.05, 0.03, 0.05);
  req.mutable_holdout()->set_held_sample_count(250);
  ASSERT_TRUE(Plan(req, &resp).ok());
  EXPECT_EQ(resp.sample_count(), 410u);
  EXPECT_EQ(resp.holdout().expected_rate_sample_count(), 410u);
  EXPECT_EQ(resp.additional_sample_count(), 160u);
  EXPECT_FALSE(resp.holdout().has_pass_probability_sample_count());
  // The rule with its values substituted: 2/0.03 rounded up is 67.
  EXPECT_THAT(resp.rule(), HasSubstr("at ceil(0.03 n) errors is <= 0.05"));
  EXPECT_THAT(resp.rule(), HasSubstr("for the next 67 samples"));
  EXPECT_THAT(resp.rule(), HasSubstr("Clopper & Pearson 1934"));
  // ceil(.03 * 410) = 13 errors; at 409, ceil(12.27) = 13 as well.
  EXPECT_NEAR(CertifyHoldout(13, 410, 0.05), 0.049939, 5e-7);
  EXPECT_GT(CertifyHoldout(13, 409, 0.05), 0.05);
  EXPECT_GE(resp.holdout().tolerated_error_count(), 13u);
  EXPECT_LE(CertifyHoldout(resp.holdout().tolerated_error_count(), 410, 0.05), 0.05);
  EXPECT_GT(CertifyHoldout(resp.holdout().tolerated_error_count() + 1, 410, 0.05), 0.05);

  req.mutable_holdout()->set_pass_probability(0.8);
  ASSERT_TRUE(Plan(req, &resp).ok());
  EXPECT_EQ(resp.sample_count(), 601u);
  EXPECT_EQ(resp.holdout().pass_probability_sample_count(), 601u);
  EXPECT_NEAR(resp.holdout().pass_probability_at_plan(), 0.8002, 5e-5);
  EXPECT_EQ(resp.additional_sample_count(), 351u);
}

// Source: the brute-force scan of fixture vc_invert.csv (scipy; Vapnik 1998
// bound, inputs R_emp = .05, h = 100, target .10, delta = .05): the planner
// answer counting ceil(.05 m) errors; checked at the boundary through
// Certify. Blumer, Ehrenfeucht, Haussler & Warmuth (1989),
// Thm 2.1(ii)(b) (from memory), evaluated in Python: eps = .1, h = 1 -> 562
// and eps = .05, h = 10 -> 12836;
// Shalev-Shwartz & Ben-David (2014), Cor. 2.3 / 4.6: |H| = 1e6,
// eps = .05 -> 337 realizable, 14004 agnostic. All labelled comparison only.
TEST_F(SelectPlanTest, TrainingPlansAndComparisonReferences) {
  v1::PlanSamplesRequest req;
  v1::TrainingPlanRequest* t = req.mutable_training();
  t->set_family(v1::BOUND_FAMILY_VC_ADDITIVE);
  t->mutable_capacity()->set_vc_dimension(100);
  t->set_expected_empirical_risk(0.05);
  t->set_target_risk(0.10);
  t->set_failure_probability(0.05);
  t->set_held_sample_count(100000);
  v1::PlanSamplesResponse resp;
  grpc::Status status = Plan(req, &resp);
  ASSERT_TRUE(status.ok()) << status.error_message();
  const auto row = ReadFixture("vc_invert.csv").at(0);
  const std::uint64_t m = static_cast<std::uint64_t>(Num(row, "planner_samples"));
  EXPECT_TRUE(resp.reachable());
  EXPECT_EQ(resp.sample_count(), m);
  EXPECT_EQ(resp.additional_sample_count(), m - 100000);
  EXPECT_EQ(resp.training().family_name(), "vc-additive");
  EXPECT_THAT(resp.rule(), HasSubstr("vc-additive"));
  // Substituted: 2/0.05 = 40; the family's published source, no unsubstituted
  // "ceil(2/" and no internal field name.
  EXPECT_THAT(resp.rule(), HasSubstr("at ceil(0.05 m) errors is <= 0.1"));
  EXPECT_THAT(resp.rule(), HasSubstr("for the next 40 samples"));
  EXPECT_THAT(resp.rule(), HasSubstr("Vapnik (1995)"));
  EXPECT_THAT(resp.rule(), Not(HasSubstr("ceil(2/")));
  for (const std::string& note : resp.notes()) {
    EXPECT_THAT(note, Not(HasSubstr("_sample_count:"))) << note;
    EXPECT_THAT(note, Not(HasSubstr("_reference:"))) << note;
  }
  const auto k = [](std::uint64_t n) {
    return static_cast<std::uint64_t>(std::ceil(0.05 * static_cast<double>(n)));
  };
  EXPECT_LE(CertifyTraining(k(m), m, t->capacity(), v1::BOUND_FAMILY_VC_ADDITIVE, 0.05), 0.10);
  EXPECT_GT(CertifyTraining(k(m - 1), m - 1, t->capacity(), v1::BOUND_FAMILY_VC_ADDITIVE, 0.05),
            0.10);
  EXPECT_LT(resp.bound_evaluation_count(), 200u);  // logarithmic search

  t->mutable_capacity()->set_vc_dimension(1);
  t->set_expected_empirical_risk(0.0);
  t->set_target_risk(0.1);
  t->clear_held_sample_count();
  ASSERT_TRUE(Plan(req, &resp).ok());
  EXPECT_EQ(resp.training().comparison_only().realizable_sample_count(), 562u);
  t->mutable_capacity()->set_vc_dimension(10);
  t->set_target_risk(0.05);
  ASSERT_TRUE(Plan(req, &resp).ok());
  EXPECT_EQ(resp.training().comparison_only().realizable_sample_count(), 12836u);
  bool labelled = false;
  for (const std::string& note : resp.notes()) labelled |= absl::StrContains(note, "comparison only");
  EXPECT_TRUE(labelled);

  t->set_family(v1::BOUND_FAMILY_OCCAM_HOEFFDING);
  t->mutable_capacity()->set_hypothesis_count(1000000);
  ASSERT_TRUE(Plan(req, &resp).ok());
  EXPECT_EQ(resp.training().comparison_only().realizable_sample_count(), 337u);
  EXPECT_EQ(resp.training().comparison_only().agnostic_sample_count(), 14004u);
}

// Unreachable targets are OK answers with the reason, not huge numbers.
TEST_F(SelectPlanTest, UnreachableTargetsSayWhy) {
  v1::PlanSamplesResponse resp;
  ASSERT_TRUE(Plan(Holdout(0.03, 0.05, 0.05), &resp).ok());
  EXPECT_FALSE(resp.reachable());
  EXPECT_EQ(resp.sample_count(), 0u);
  EXPECT_THAT(resp.reason(), HasSubstr("not below the target risk"));
  ASSERT_TRUE(Plan(Holdout(1.0, 0.0, 0.05), &resp).ok());
  EXPECT_FALSE(resp.reachable());
  EXPECT_THAT(resp.reason(), HasSubstr("1 or more"));

  v1::PlanSamplesRequest req;
  v1::TrainingPlanRequest* t = req.mutable_training();
  t->set_family(v1::BOUND_FAMILY_VC_ADDITIVE);
  t->mutable_capacity()->set_vc_dimension(10);
  t->set_expected_empirical_risk(0.2);
  t->set_target_risk(0.1);
  t->set_failure_probability(0.05);
  ASSERT_TRUE(Plan(req, &resp).ok());
  EXPECT_FALSE(resp.reachable());
  EXPECT_THAT(resp.reason(), HasSubstr("expected empirical risk"));
}

TEST_F(SelectPlanTest, InvalidPlansNameWireFields) {
  v1::PlanSamplesResponse resp;
  v1::PlanSamplesRequest bad = Holdout(-0.1, 1.5, 1.0);
  bad.mutable_holdout()->set_pass_probability(0.0);
  bad.mutable_holdout()->set_held_sample_count((1ULL << 53) + 1);
  grpc::Status status = Plan(bad, &resp);
  EXPECT_THAT(status.error_message(), HasSubstr("holdout.target_risk"));
  EXPECT_THAT(Fields(status),
              UnorderedElementsAreArray(std::vector<std::string>{
                  "holdout.target_risk", "holdout.expected_risk", "holdout.failure_probability",
                  "holdout.pass_probability", "holdout.held_sample_count"}));

  v1::PlanSamplesRequest training;
  training.mutable_training()->set_target_risk(0.1);
  training.mutable_training()->set_failure_probability(0.05);
  training.mutable_training()->set_expected_empirical_risk(-1);
  EXPECT_THAT(Fields(Plan(training, &resp)),
              UnorderedElementsAreArray(std::vector<std::string>{
                  "training.family", "training.capacity", "training.expected_empirical_risk"}));

  training.mutable_training()->set_family(v1::BOUND_FAMILY_OCCAM_KL);
  training.mutable_training()->mutable_capacity()->set_vc_dimension(5);
  training.mutable_training()->set_expected_empirical_risk(0.01);
  EXPECT_THAT(Fields(Plan(training, &resp)), ElementsAre("training.capacity"));

  EXPECT_THAT(Fields(Plan(v1::PlanSamplesRequest(), &resp)), ElementsAre("plan"));
}

}  // namespace
}  // namespace riskbound::rpc
