// Cancellation and deadlines of the core entry points (service/core/stop.h).
// Each entry point given a token that has already stopped returns exactly the
// token's status (CANCELLED, or DEADLINE_EXCEEDED for a deadline in the past),
// never a partial answer; a long computation given a short deadline stops
// well before it would otherwise finish. No timing is asserted beyond "it
// stopped, and sooner than the unstopped run".
// Source for the expected codes: the StopToken contract in stop.h (the core's
// own interface; gRPC's CANCELLED / DEADLINE_EXCEEDED codes, common practice).
#include "service/core/stop.h"

#include <chrono>
#include <functional>
#include <string>
#include <thread>

#include "gtest/gtest.h"
#include "service/core/capacity.h"
#include "service/core/certify.h"
#include "service/core/gate.h"
#include "service/core/plan.h"
#include "service/core/select.h"
#include "tests/testing/status_matchers.h"

namespace riskbound::core {
namespace {

using ::riskbound::testing::StatusIs;

CertifyRequest AllFamiliesRequest() {
  CertifyRequest req;
  req.family_choice = FamilyChoice::kAllApplicable;
  req.evidence.holdout = SampleCounts{212, 5000};
  TrainingEvidence t;
  t.error_count = 270;
  t.sample_count = 9000;
  t.capacity.vc_dimension = 41;
  t.capacity.log_hypothesis_count = 13.86;
  req.evidence.training = t;
  return req;
}

SelectRequest LargeSelect(std::size_t candidates) {
  SelectRequest req;
  req.family = Family::kOccamKl;
  for (std::size_t i = 0; i < candidates; ++i) {
    StructureCandidate c;
    c.id = "c" + std::to_string(i);
    c.error_count = 300 + i % 50;
    c.sample_count = 10000;
    c.capacity.log_hypothesis_count = static_cast<double>(i);
    req.structure.push_back(c);
  }
  return req;
}

HoldoutPlanRequest PassPlan() {
  HoldoutPlanRequest req;
  req.target_risk = 0.05;
  req.expected_risk = 0.04;
  req.pass_probability = 0.9;
  return req;
}

TrainingPlanRequest VcPlan() {
  TrainingPlanRequest req;
  req.family = Family::kVcAdditive;
  req.capacity.vc_dimension = 50;
  req.expected_empirical_risk = 0.02;
  req.target_risk = 0.1;
  return req;
}

GateCandidate HoldCandidate() {
  GateCandidate c;
  c.id = "candidate";
  c.evidence.holdout = SampleCounts{45, 1000};  // rate 0.045 < 0.05: a HOLD with a plan
  return c;
}

ModelDescription Relu() {
  ModelDescription m;
  m.kind = ModelKind::kReluNetwork;
  m.layer_widths = {784, 128, 64, 1};
  return m;
}

// Calls every entry point with `stop` and checks each returns `code`.
void ExpectEveryEntryPoint(const StopToken& stop, absl::StatusCode code) {
  EXPECT_THAT(Certify(AllFamiliesRequest(), stop).status(), StatusIs(code));
  EXPECT_THAT(SelectStructure(LargeSelect(3), stop).status(), StatusIs(code));
  EXPECT_THAT(PlanHoldout(PassPlan(), stop).status(), StatusIs(code));
  EXPECT_THAT(PlanTraining(VcPlan(), stop).status(), StatusIs(code));
  EXPECT_THAT(DecideGate(GatePolicy{}, HoldCandidate(), std::nullopt, stop).status(),
              StatusIs(code));
  EXPECT_THAT(EstimateCapacity(Relu(), stop).status(), StatusIs(code));
}

TEST(StopTest, NeverTokenLetsEveryEntryPointFinish) {
  EXPECT_TRUE(Certify(AllFamiliesRequest()).ok());
  EXPECT_TRUE(SelectStructure(LargeSelect(3)).ok());
  EXPECT_TRUE(PlanHoldout(PassPlan()).ok());
  EXPECT_TRUE(PlanTraining(VcPlan()).ok());
  EXPECT_TRUE(DecideGate(GatePolicy{}, HoldCandidate(), std::nullopt).ok());
  EXPECT_TRUE(EstimateCapacity(Relu()).ok());
}

TEST(StopTest, CancelledTokenMakesEveryEntryPointReturnCancelled) {
  StopToken stop;
  stop.Cancel();
  ExpectEveryEntryPoint(stop, absl::StatusCode::kCancelled);
}

TEST(StopTest, PastDeadlineMakesEveryEntryPointReturnDeadlineExceeded) {
  const StopToken stop(absl::Now() - absl::Seconds(1));
  ExpectEveryEntryPoint(stop, absl::StatusCode::kDeadlineExceeded);
}

TEST(StopTest, CancelWinsOverAPassedDeadline) {
  StopToken stop(absl::Now() - absl::Seconds(1));
  stop.Cancel();
  EXPECT_THAT(Certify(AllFamiliesRequest(), stop).status(),
              StatusIs(absl::StatusCode::kCancelled));
}

// A live token changes nothing: invalid input is still INVALID_ARGUMENT.
TEST(StopTest, InvalidRequestWithLiveTokenIsStillInvalid) {
  StopToken stop;
  CertifyRequest bad = AllFamiliesRequest();
  bad.failure_probability = 2.0;
  EXPECT_THAT(Certify(bad, stop).status(), StatusIs(absl::StatusCode::kInvalidArgument));
}

double SecondsOf(const std::function<void()>& fn) {
  const auto start = std::chrono::steady_clock::now();
  fn();
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
}

// A selection over many candidates, given a deadline of a twentieth of its
// unstopped running time, stops with DEADLINE_EXCEEDED and sooner than the
// unstopped run. The candidate count grows until the unstopped run takes
// long enough (>= 20 ms) for the comparison to mean something on any machine.
TEST(StopTest, LongSelectionStopsAtItsDeadline) {
  std::size_t count = 10000;
  SelectRequest req = LargeSelect(count);
  double full = SecondsOf([&] { ASSERT_TRUE(SelectStructure(req).ok()); });
  while (full < 0.02 && count < 640000) {
    count *= 2;
    req = LargeSelect(count);
    full = SecondsOf([&] { ASSERT_TRUE(SelectStructure(req).ok()); });
  }
  const StopToken stop(absl::Now() + absl::Seconds(full / 20.0));
  absl::Status status;
  const double stopped = SecondsOf([&] { status = SelectStructure(req, stop).status(); });
  EXPECT_THAT(status, StatusIs(absl::StatusCode::kDeadlineExceeded));
  EXPECT_LT(stopped, full);
}

// The same from another thread: Cancel() while the selection runs.
TEST(StopTest, CancelFromAnotherThreadStopsASelection) {
  const SelectRequest req = LargeSelect(200000);
  StopToken stop;
  absl::Status status;
  std::thread worker([&] { status = SelectStructure(req, stop).status(); });
  stop.Cancel();
  worker.join();
  // The cancel may land before the first look or between candidates; either
  // way no partial answer comes back.
  EXPECT_THAT(status, StatusIs(absl::StatusCode::kCancelled));
}

}  // namespace
}  // namespace riskbound::core
