// The texts users read (family sources and assumptions, capacity sources,
// formulas and notes, certificate notes, rules, reasons, cautions) cite
// published sources only: never a document users do not have ("formula
// sheet", "bounds.md", "check_formulas", a path), never an internal identifier (a struct
// field followed by a colon, a C++ or protobuf enum name). Each entry point
// is driven through representative requests and every string of its answer
// is checked.
#include <string>
#include <vector>

#include "absl/strings/ascii.h"
#include "absl/strings/match.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "service/core/capacity.h"
#include "service/core/certify.h"
#include "service/core/families.h"
#include "service/core/gate.h"
#include "service/core/plan.h"
#include "service/core/select.h"

namespace riskbound::core {
namespace {

// Checks one user-facing text.
void ExpectPublishedOnly(const std::string& text) {
  SCOPED_TRACE(text);
  const std::string lower = absl::AsciiStrToLower(text);
  for (const char* bad : {"formula sheet", "bounds.md", "check_formulas", "../shared", "/work/",
                          "sheet ", "_reference", "type_uint", "bound_family_", "model_kind_",
                          "kvc", "kholdout", "std::", "ceil(2/p)", "ceil(0 "}) {
    EXPECT_FALSE(absl::StrContains(lower, bad)) << "contains \"" << bad << "\"";
  }
}

void ExpectAll(const std::vector<std::string>& texts) {
  for (const std::string& t : texts) ExpectPublishedOnly(t);
}

TEST(TextsTest, FamilyRegistry) {
  for (const FamilySpec& spec : Families()) {
    ExpectPublishedOnly(std::string(spec.title));
    ExpectPublishedOnly(std::string(spec.source));
    ExpectPublishedOnly(std::string(spec.assumptions));
    // Every source names authors and a year.
    EXPECT_TRUE(absl::StrContains(spec.source, "(1") || absl::StrContains(spec.source, "(2"))
        << spec.family_name;
  }
  ExpectAll(Cautions());
  ExpectAll(GateCautions());
}

TEST(TextsTest, CapacityCatalogue) {
  std::vector<ModelDescription> models;
  auto add = [&](ModelKind kind) -> ModelDescription& {
    models.emplace_back();
    models.back().kind = kind;
    return models.back();
  };
  add(ModelKind::kHalfspace).dimension = 10;
  {
    ModelDescription& m = add(ModelKind::kPolynomialThreshold);
    m.dimension = 5;
    m.degree = 3;
  }
  {
    ModelDescription& m = add(ModelKind::kMarginLinear);
    m.radius = 1.0;
    m.margin = 0.1;
  }
  add(ModelKind::kAxisAlignedBoxes).dimension = 3;
  add(ModelKind::kInterval);
  add(ModelKind::kUnionOfIntervals).interval_count = 4;
  add(ModelKind::kDecisionStump).feature_count = 20;
  {
    ModelDescription& m = add(ModelKind::kDecisionTree);
    m.leaf_count = 16;
    m.feature_count = 20;
  }
  {
    ModelDescription& m = add(ModelKind::kVotedEnsemble);
    m.member_count = 2;
    m.member_vc_dimension = 2;
  }
  add(ModelKind::kThresholdNetwork).layer_widths = {10, 5, 1};
  add(ModelKind::kReluNetwork).layer_widths = {10, 5, 1};
  {
    ModelDescription& m = add(ModelKind::kSigmoidNetwork);
    m.weight_count = 61;
    m.unit_count = 6;
  }
  add(ModelKind::kFiniteClass).description_bits = 40;
  add(ModelKind::kNearestNeighbour);
  add(ModelKind::kRbfKernelNoMargin);
  for (const ModelDescription& m : models) {
    absl::StatusOr<CapacityEstimate> e = EstimateCapacity(m);
    ASSERT_TRUE(e.ok()) << ModelKindName(*m.kind) << ": " << e.status();
    ExpectPublishedOnly(e->source);
    ExpectPublishedOnly(e->formula);
    ExpectAll(e->notes);
    ExpectPublishedOnly(std::string(ModelKindTitle(*m.kind)));
  }
}

TEST(TextsTest, CertifySelectPlanGate) {
  CertifyRequest certify;
  certify.evidence.holdout = SampleCounts{12, 1000};
  TrainingEvidence t;
  t.error_count = 40;
  t.sample_count = 5000;
  t.capacity.model = ModelDescription{};
  t.capacity.model->kind = ModelKind::kReluNetwork;
  t.capacity.model->layer_widths = {8, 4, 1};
  certify.evidence.training = t;
  certify.family_choice = FamilyChoice::kAllApplicable;
  absl::StatusOr<CertifyResult> c = Certify(certify);
  ASSERT_TRUE(c.ok()) << c.status();
  ExpectPublishedOnly(c->rule);
  for (const Certificate& cert : c->certificates) ExpectAll(cert.notes);

  SelectRequest select;
  select.family = Family::kVcAdditive;
  for (std::uint64_t h : {2, 8, 32}) {
    StructureCandidate s;
    s.id = "h" + std::to_string(h);
    s.error_count = 100 / h;
    s.sample_count = 2000;
    s.capacity.vc_dimension = h;
    select.structure.push_back(s);
  }
  absl::StatusOr<SelectResult> r = SelectStructure(select);
  ASSERT_TRUE(r.ok()) << r.status();
  ExpectPublishedOnly(r->delta_rule);
  ExpectAll(r->notes);
  for (const CandidateBound& b : r->candidates) ExpectAll(b.notes);

  for (double rate : {0.0, 0.02}) {
    HoldoutPlanRequest h;
    h.target_risk = 0.05;
    h.expected_risk = rate;
    h.pass_probability = 0.8;
    absl::StatusOr<HoldoutPlan> hp = PlanHoldout(h);
    ASSERT_TRUE(hp.ok()) << hp.status();
    ExpectPublishedOnly(hp->rule);
    ExpectAll(hp->notes);
    h.pass_probability.reset();
    hp = PlanHoldout(h);
    ASSERT_TRUE(hp.ok()) << hp.status();
    ExpectPublishedOnly(hp->rule);
    for (Family f : {Family::kVcAdditive, Family::kOccamKl}) {
      TrainingPlanRequest tr;
      tr.family = f;
      if (f == Family::kVcAdditive) {
        tr.capacity.vc_dimension = 10;
      } else {
        tr.capacity.hypothesis_count = 1000000;
      }
      tr.expected_empirical_risk = rate;
      tr.target_risk = 0.1;
      absl::StatusOr<TrainingPlan> tp = PlanTraining(tr);
      ASSERT_TRUE(tp.ok()) << tp.status();
      ExpectPublishedOnly(tp->rule);
      ExpectAll(tp->notes);
    }
  }

  GatePolicy policy;
  policy.max_risk = 0.05;
  GateCandidate candidate;
  candidate.id = "late-risk-v14";
  for (SampleCounts counts : {SampleCounts{10, 1000}, SampleCounts{48, 1000},
                              SampleCounts{90, 1000}}) {
    candidate.evidence.holdout = counts;
    ChampionComparison champion;
    champion.champion_id = "late-risk-v13";
    champion.paired = PairedCounts{5, 10, counts.error_count - 5, 1000};
    absl::StatusOr<GateDecision> d = DecideGate(policy, candidate, champion);
    ASSERT_TRUE(d.ok()) << d.status();
    ExpectAll(d->reasons);
    for (const DeltaSpend& s : d->delta_ledger) ExpectPublishedOnly(s.test);
    ExpectAll(d->risk_certificate.notes);
  }
}

}  // namespace
}  // namespace riskbound::core
