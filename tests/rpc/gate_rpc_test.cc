// RiskBound.Gate over a loopback channel: verdicts on each side of the
// boundaries, the decision values, the audit record and its digest, and the
// INVALID_ARGUMENT answers with field paths.
#include <chrono>
#include <cmath>
#include <functional>
#include <limits>
#include <memory>
#include <set>
#include <string>
#include <utility>
#include <vector>

#include "absl/strings/escaping.h"
#include "absl/time/time.h"
#include "gmock/gmock.h"
#include "grpcpp/create_channel.h"
#include "grpcpp/security/credentials.h"
#include "gtest/gtest.h"
#include "riskbound/v1/riskbound.grpc.pb.h"
#include "service/core/certify.h"
#include "service/rpc/gate_convert.h"
#include "service/rpc/server.h"
#include "tests/testing/loopback_server.h"
#include "tests/testing/fixture.h"
#include "tests/rpc/error_details.h"

namespace riskbound::rpc {
namespace {

using ::riskbound::testing::Num;
using ::riskbound::testing::ReadFixture;
using ::testing::HasSubstr;

std::uint64_t U(const ::riskbound::testing::FixtureRow& row, const char* key) {
  return static_cast<std::uint64_t>(std::stoull(row.at(key)));
}

// A started server and a stub on it.
using Endpoint = ::riskbound::testing::LoopbackEndpoint;

Endpoint Start() { return ::riskbound::testing::StartLoopbackServer(); }

grpc::Status Call(v1::RiskBound::Stub* stub, const v1::GateRequest& req, v1::GateResponse* resp) {
  return stub->Gate(::riskbound::testing::CallContext().get(), req, resp);
}

v1::GateRequest Request(double max_risk, double delta, std::uint64_t errors,
                        std::uint64_t samples) {
  v1::GateRequest r;
  r.mutable_policy()->set_max_risk(max_risk);
  r.mutable_policy()->set_failure_probability(delta);
  r.mutable_candidate()->set_id("damage-screen-v8");
  r.mutable_candidate()->mutable_evidence()->mutable_holdout()->set_error_count(errors);
  r.mutable_candidate()->mutable_evidence()->mutable_holdout()->set_sample_count(samples);
  return r;
}

// The request whose digest the outside reference below was computed for.
v1::GateRequest ReferenceRequest() {
  v1::GateRequest r = Request(0.05, 0.05, 20, 2000);
  r.mutable_policy()->add_allowed_families(v1::BOUND_FAMILY_HOLDOUT_EXACT_BINOMIAL);
  r.mutable_policy()->add_allowed_families(v1::BOUND_FAMILY_HOLDOUT_KL_CHERNOFF);
  r.mutable_policy()->set_min_holdout_sample_count(1000);
  r.mutable_policy()->set_max_regression(0.005);
  r.mutable_champion()->set_champion_id("damage-screen-v7");
  v1::PairedCounts* p = r.mutable_champion()->mutable_paired();
  p->set_both_wrong_count(12);
  p->set_only_champion_wrong_count(15);
  p->set_only_challenger_wrong_count(8);
  p->set_sample_count(2000);
  return r;
}

class GateRpcTest : public ::testing::Test {
 protected:
  void SetUp() override {
    endpoint_ = Start();
    ASSERT_NE(endpoint_.stub, nullptr);
  }
  v1::GateResponse MustGate(const v1::GateRequest& req) {
    v1::GateResponse resp;
    const grpc::Status s = Call(endpoint_.stub.get(), req, &resp);
    EXPECT_TRUE(s.ok()) << s.error_message();
    return resp;
  }
  v1::Verdict VerdictOf(const v1::GateRequest& req) { return MustGate(req).verdict(); }
  grpc::Status Refused(const v1::GateRequest& req) {
    v1::GateResponse resp;
    return Call(endpoint_.stub.get(), req, &resp);
  }
  Endpoint endpoint_;
};

// The error counts where the verdict flips, through the RPC.
// Source: scipy.stats.beta Clopper-Pearson limits at delta/2 per side
// (fixture gate_risk_boundary.csv, written by tests/reference/fixtures_gate.py).
TEST_F(GateRpcTest, RiskVerdictsEachSideOfTheBoundaries) {
  const auto rows = ReadFixture("gate_risk_boundary.csv");
  ASSERT_GE(rows.size(), 2u);
  for (const auto& row : rows) {
    const std::uint64_t n = U(row, "samples");
    const double eps = Num(row, "max_risk");
    const double delta = Num(row, "delta");
    const std::uint64_t k_max = U(row, "k_max_promote");
    const std::uint64_t k_min = U(row, "k_min_reject");
    SCOPED_TRACE(::testing::Message() << "n=" << n << " eps=" << eps);
    EXPECT_EQ(VerdictOf(Request(eps, delta, k_max, n)), v1::VERDICT_PROMOTE);
    EXPECT_EQ(VerdictOf(Request(eps, delta, k_max + 1, n)), v1::VERDICT_HOLD);
    EXPECT_EQ(VerdictOf(Request(eps, delta, k_min - 1, n)), v1::VERDICT_HOLD);
    EXPECT_EQ(VerdictOf(Request(eps, delta, k_min, n)), v1::VERDICT_REJECT);
  }
}

// The paired disagreement count b where the verdict flips.
// Source: scipy Clopper-Pearson limits at delta/8, linear scan over b
// (fixture gate_paired_boundary.csv).
TEST_F(GateRpcTest, PairedChampionVerdictsEachSideOfTheBoundaries) {
  const auto rows = ReadFixture("gate_paired_boundary.csv");
  ASSERT_GE(rows.size(), 2u);
  for (const auto& row : rows) {
    const std::uint64_t n = U(row, "samples");
    const std::uint64_t c = U(row, "c");
    const std::uint64_t b_max = U(row, "b_max_promote");
    const std::uint64_t b_min = U(row, "b_min_reject");
    auto verdict = [&](std::uint64_t b) {
      const std::uint64_t both = 10;
      v1::GateRequest r = Request(0.5, Num(row, "delta"), both + b, n);
      r.mutable_policy()->set_max_regression(Num(row, "tolerance"));
      r.mutable_champion()->set_champion_id("damage-screen-v7");
      v1::PairedCounts* p = r.mutable_champion()->mutable_paired();
      p->set_both_wrong_count(both);
      p->set_only_champion_wrong_count(c);
      p->set_only_challenger_wrong_count(b);
      p->set_sample_count(n);
      return VerdictOf(r);
    };
    SCOPED_TRACE(::testing::Message() << "n=" << n << " c=" << c);
    EXPECT_EQ(verdict(b_max), v1::VERDICT_PROMOTE);
    EXPECT_EQ(verdict(b_max + 1), v1::VERDICT_HOLD);
    EXPECT_EQ(verdict(b_min - 1), v1::VERDICT_HOLD);
    EXPECT_EQ(verdict(b_min), v1::VERDICT_REJECT);
  }
}

// Source: McNemar exact one-sided p for b = 10, c = 25 is 0.008336923900060357
// (scipy.stats.binomtest(10, 35, 0.5, alternative="less"), fixture
// mcnemar.csv); the ledger is delta/4 per test with a champion (gate.h).
TEST_F(GateRpcTest, ChampionResponseCarriesTheNumbersAndTheLedger) {
  v1::GateRequest r = Request(0.05, 0.05, 15, 1000);
  r.mutable_champion()->set_champion_id("damage-screen-v7");
  v1::PairedCounts* p = r.mutable_champion()->mutable_paired();
  p->set_both_wrong_count(5);
  p->set_only_champion_wrong_count(25);
  p->set_only_challenger_wrong_count(10);
  p->set_sample_count(1000);
  r.mutable_policy()->set_max_regression(0.01);
  const v1::GateResponse resp = MustGate(r);
  EXPECT_EQ(resp.verdict(), v1::VERDICT_PROMOTE);
  ASSERT_TRUE(resp.has_mcnemar_p_value());
  EXPECT_NEAR(resp.mcnemar_p_value(), 0.008336923900060357, 1e-12);
  ASSERT_TRUE(resp.has_difference_upper_bound());
  ASSERT_TRUE(resp.has_difference_lower_bound());
  EXPECT_LE(resp.difference_upper_bound(), 0.01);
  EXPECT_LT(resp.difference_lower_bound(), resp.difference_upper_bound());
  ASSERT_TRUE(resp.has_risk_lower_bound());
  EXPECT_FALSE(resp.has_additional_sample_count());
  EXPECT_EQ(resp.risk_certificate().family_name(), "holdout-binomial");
  EXPECT_FALSE(resp.risk_certificate().has_risk_lower_bound());
  ASSERT_EQ(resp.delta_ledger_size(), 4);
  for (const v1::DeltaSpend& d : resp.delta_ledger()) {
    EXPECT_EQ(d.failure_probability(), 0.0125) << d.test();
  }
  EXPECT_THAT(resp.delta_ledger(2).test(), HasSubstr("difference upper bound"));
  EXPECT_DOUBLE_EQ(resp.audit().spent_failure_probability(), 0.05);
  ASSERT_FALSE(resp.reasons().empty());
  EXPECT_THAT(resp.reasons(0), HasSubstr("PROMOTE"));
  EXPECT_THAT(resp.reasons(0), HasSubstr("damage-screen-v7"));

  // Unpaired: the response says the comparison is weaker.
  r.mutable_champion()->mutable_champion_holdout()->set_error_count(25);
  r.mutable_champion()->mutable_champion_holdout()->set_sample_count(1000);
  const v1::GateResponse unpaired = MustGate(r);
  EXPECT_FALSE(unpaired.has_mcnemar_p_value());
  bool says_weaker = false;
  for (const std::string& reason : unpaired.reasons()) {
    says_weaker = says_weaker || reason.find("weaker") != std::string::npos;
  }
  EXPECT_TRUE(says_weaker);
}

// A HOLD below the policy's minimum names the samples still needed: at least
// the 1000 - 400 missing ones (common practice: the minimum is a hard floor).
TEST_F(GateRpcTest, HoldCarriesAdditionalSamples) {
  v1::GateRequest r = Request(0.05, 0.05, 0, 400);
  r.mutable_policy()->set_min_holdout_sample_count(1000);
  const v1::GateResponse resp = MustGate(r);
  EXPECT_EQ(resp.verdict(), v1::VERDICT_HOLD);
  ASSERT_TRUE(resp.has_additional_sample_count());
  EXPECT_GE(resp.additional_sample_count(), 600u);
  EXPECT_THAT(resp.reasons(0), HasSubstr("minimum of 1000"));
}

// policy.sequential reaches the core: the risk bounds are holdout-anytime,
// named in the audit record and the ledger; a fixed-size hold-out family
// beside it is refused with its field path. The values are the core's
// (anytime_test checks them against scipy).
TEST_F(GateRpcTest, SequentialPolicyUsesAnytimeBounds) {
  v1::GateRequest r = Request(0.06, 0.025, 500, 10000);
  r.mutable_policy()->set_sequential(true);
  const v1::GateResponse resp = MustGate(r);
  EXPECT_EQ(resp.verdict(), v1::VERDICT_PROMOTE);
  ASSERT_EQ(resp.audit().families_used_size(), 1);
  EXPECT_EQ(resp.audit().families_used(0), v1::BOUND_FAMILY_HOLDOUT_ANYTIME);
  EXPECT_EQ(resp.risk_certificate().family(), v1::BOUND_FAMILY_HOLDOUT_ANYTIME);
  EXPECT_EQ(resp.risk_certificate().family_name(), "holdout-anytime");
  ASSERT_EQ(resp.delta_ledger_size(), 2);
  EXPECT_EQ(resp.delta_ledger(1).test(), "risk lower bound: holdout-anytime (anytime-valid)");

  r.mutable_policy()->add_allowed_families(v1::BOUND_FAMILY_HOLDOUT_ANYTIME);
  r.mutable_policy()->add_allowed_families(v1::BOUND_FAMILY_HOLDOUT_EXACT_BINOMIAL);
  v1::GateResponse refused;
  const grpc::Status s = Call(endpoint_.stub.get(), r, &refused);
  EXPECT_EQ(s.error_code(), grpc::StatusCode::INVALID_ARGUMENT);
  EXPECT_THAT(s.error_message(), HasSubstr("policy.allowed_families[1]"));
}

TEST_F(GateRpcTest, AuditRecord) {
  const v1::GateResponse resp = MustGate(ReferenceRequest());
  const v1::AuditRecord& a = resp.audit();
  EXPECT_EQ(a.engine_version(), RISKBOUND_ENGINE_VERSION);
  EXPECT_EQ(a.request_sha256().size(), 64u);
  // Exact binomial and KL-Chernoff for the upper bound, the exact binomial's
  // lower limit already among them.
  ASSERT_EQ(a.families_used_size(), 2);
  EXPECT_EQ(a.families_used(0), v1::BOUND_FAMILY_HOLDOUT_EXACT_BINOMIAL);
  EXPECT_EQ(a.families_used(1), v1::BOUND_FAMILY_HOLDOUT_KL_CHERNOFF);
  double sum = 0.0;
  for (const v1::DeltaSpend& d : resp.delta_ledger()) sum += d.failure_probability();
  EXPECT_DOUBLE_EQ(a.spent_failure_probability(), sum);
  EXPECT_LE(a.spent_failure_probability(), 0.05);
  // The timestamp is the wall clock: only its shape is checked.
  EXPECT_THAT(a.timestamp(), ::testing::MatchesRegex(
                                 "[0-9]{4}-[0-9]{2}-[0-9]{2}T[0-9]{2}:[0-9]{2}:[0-9.]+Z"));
  ASSERT_EQ(static_cast<std::size_t>(a.cautions_size()), core::Cautions().size() + 1);
  for (std::size_t i = 0; i < core::Cautions().size(); ++i) {
    EXPECT_EQ(a.cautions(static_cast<int>(i)), core::Cautions()[i]);
  }
  EXPECT_THAT(a.cautions(a.cautions_size() - 1), HasSubstr("fixed before the evidence"));
}

// Source: SHA-256 of the deterministic serialization of ReferenceRequest(),
// computed OUTSIDE this engine with /usr/bin/python3: the protobuf package's
// pure-Python implementation (PROTOCOL_BUFFERS_PYTHON_IMPLEMENTATION=python)
// built the same message from Python stubs of gate.proto, serialized it with
// SerializeToString(deterministic=True), and hashlib.sha256 hashed it. The
// 96 bytes, hex, are the second constant.
constexpr char kReferenceDigest[] =
    "50840a82ad393620384d716f9475d6f54c77ac71bebae320feb43dbd640d62d1";
constexpr char kReferenceBytesHex[] =
    "0a22099a9999999999a93f119a9999999999a93f1a02010320e807297b14ae47e17a743f121b0a1064616d6167"
    "652d73637265656e2d763812070a05081410d00f1a1d0a1064616d6167652d73637265656e2d76371209080c10"
    "0f180820d00f";

TEST_F(GateRpcTest, DigestMatchesAnOutsideComputation) {
  EXPECT_EQ(absl::BytesToHexString(CanonicalGateRequestBytes(ReferenceRequest())),
            kReferenceBytesHex);
  EXPECT_EQ(MustGate(ReferenceRequest()).audit().request_sha256(), kReferenceDigest);
}

// Stable across calls and across a fresh server; any changed input changes it.
TEST_F(GateRpcTest, DigestStableAndSensitive) {
  const std::string first = MustGate(ReferenceRequest()).audit().request_sha256();
  EXPECT_EQ(MustGate(ReferenceRequest()).audit().request_sha256(), first);
  {
    Endpoint fresh = Start();
    ASSERT_NE(fresh.stub, nullptr);
    v1::GateResponse resp;
    ASSERT_TRUE(Call(fresh.stub.get(), ReferenceRequest(), &resp).ok());
    EXPECT_EQ(resp.audit().request_sha256(), first);
  }
  // Unknown fields are not part of the canonical form.
  v1::GateRequest with_unknown = ReferenceRequest();
  with_unknown.GetReflection()->MutableUnknownFields(&with_unknown)->AddVarint(999, 1);
  EXPECT_EQ(Sha256Hex(CanonicalGateRequestBytes(with_unknown)), first);

  using Mutation = std::pair<const char*, std::function<void(v1::GateRequest*)>>;
  const std::vector<Mutation> mutations = {
      {"policy.max_risk", [](v1::GateRequest* r) { r->mutable_policy()->set_max_risk(0.051); }},
      {"policy.failure_probability",
       [](v1::GateRequest* r) { r->mutable_policy()->set_failure_probability(0.04); }},
      {"policy.allowed_families order",
       [](v1::GateRequest* r) {
         r->mutable_policy()->mutable_allowed_families()->SwapElements(0, 1);
       }},
      {"policy.min_holdout_sample_count",
       [](v1::GateRequest* r) { r->mutable_policy()->set_min_holdout_sample_count(999); }},
      {"policy.max_regression",
       [](v1::GateRequest* r) { r->mutable_policy()->set_max_regression(0.0); }},
      {"policy.plan_pass_probability",
       [](v1::GateRequest* r) { r->mutable_policy()->set_plan_pass_probability(0.8); }},
      {"candidate.id", [](v1::GateRequest* r) { r->mutable_candidate()->set_id("damage-screen-v9"); }},
      {"candidate.evidence.baseline_error_rate",
       [](v1::GateRequest* r) {
         r->mutable_candidate()->mutable_evidence()->set_baseline_error_rate(0.5);
       }},
      {"champion.champion_id",
       [](v1::GateRequest* r) { r->mutable_champion()->set_champion_id("damage-screen-v6"); }},
      {"champion.paired.both_wrong_count + candidate errors",
       [](v1::GateRequest* r) {
         r->mutable_champion()->mutable_paired()->set_both_wrong_count(13);
         r->mutable_candidate()->mutable_evidence()->mutable_holdout()->set_error_count(21);
       }},
      {"champion removed", [](v1::GateRequest* r) { r->clear_champion(); }},
  };
  std::set<std::string> digests = {first};
  for (const auto& [name, mutate] : mutations) {
    v1::GateRequest r = ReferenceRequest();
    mutate(&r);
    const std::string digest = MustGate(r).audit().request_sha256();
    EXPECT_NE(digest, first) << name;
    EXPECT_TRUE(digests.insert(digest).second) << name << " collides with another mutation";
  }
}

// Source: FIPS 180-2, Appendix B.1 and B.2 (the "abc" and 448-bit messages),
// and the SHA-256 of the empty string (NIST CSRC example values).
TEST(GateConvertTest, Sha256KnownAnswers) {
  EXPECT_EQ(Sha256Hex("abc"), "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
  EXPECT_EQ(Sha256Hex("abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq"),
            "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1");
  EXPECT_EQ(Sha256Hex(""), "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855");
}

// The clock is injected: a fixed time gives a fixed RFC 3339 UTC text.
// Source: RFC 3339, section 5.6 (date-time with "Z"); Unix time 1772366400 is
// 2026-03-01T12:00:00Z (by `date -u -d @1772366400`).
TEST(GateConvertTest, TimestampFromInjectedClock) {
  EXPECT_EQ(FormatAuditTimestamp(absl::FromUnixSeconds(0)), "1970-01-01T00:00:00Z");
  EXPECT_EQ(FormatAuditTimestamp(absl::FromUnixSeconds(1772366400) + absl::Milliseconds(250)),
            "2026-03-01T12:00:00.25Z");
  const auto inputs = GateInputsFromProto(ReferenceRequest());
  ASSERT_TRUE(inputs.refusals.empty());
  auto decision =
      core::DecideGate(inputs.request.policy, inputs.request.candidate, inputs.request.champion);
  ASSERT_TRUE(decision.ok()) << decision.status();
  const v1::GateResponse resp = GateResponseToProto(
      *decision, ReferenceRequest(), absl::FromUnixSeconds(1772366400), "deploy-7f3a:42");
  EXPECT_EQ(resp.audit().timestamp(), "2026-03-01T12:00:00Z");
  EXPECT_EQ(resp.audit().request_sha256(), kReferenceDigest);
  // The request id is the call's, copied as given; it is not in the digest.
  EXPECT_EQ(resp.audit().request_id(), "deploy-7f3a:42");
}

std::vector<std::string> ViolatedFields(const grpc::Status& status) {
  return ::riskbound::testing::ViolatedFieldsOf(status);
}

TEST_F(GateRpcTest, InvalidArgumentNamesTheFields) {
  using ::testing::Contains;
  v1::GateRequest r = Request(std::numeric_limits<double>::quiet_NaN(), 2.0, 5, 100);
  grpc::Status s = Refused(r);
  EXPECT_EQ(s.error_code(), grpc::StatusCode::INVALID_ARGUMENT);
  EXPECT_THAT(s.error_message(), HasSubstr("policy.max_risk"));
  EXPECT_THAT(ViolatedFields(s), Contains("policy.max_risk"));
  EXPECT_THAT(ViolatedFields(s), Contains("policy.failure_probability"));

  r = Request(0.05, 0.05, 5, 100);
  r.mutable_policy()->set_max_risk(std::numeric_limits<double>::infinity());
  r.mutable_policy()->set_plan_pass_probability(1.0);
  r.mutable_policy()->set_max_regression(std::nan(""));
  r.mutable_policy()->add_allowed_families(static_cast<v1::BoundFamily>(999));
  r.mutable_candidate()->clear_id();
  s = Refused(r);
  EXPECT_EQ(s.error_code(), grpc::StatusCode::INVALID_ARGUMENT);
  for (const char* field : {"policy.max_risk", "policy.plan_pass_probability",
                            "policy.max_regression", "policy.allowed_families[0]",
                            "candidate.id"}) {
    EXPECT_THAT(ViolatedFields(s), Contains(field));
  }

  // Wire-shape and core violations together in one answer.
  r = Request(0.05, 0.05, 5, 100);
  v1::TrainingEvidence* t = r.mutable_candidate()->mutable_evidence()->mutable_training();
  t->set_sample_count(10);
  t->mutable_capacity()->set_hypothesis_count(0);
  r.mutable_policy()->set_failure_probability(-1.0);
  s = Refused(r);
  EXPECT_EQ(s.error_code(), grpc::StatusCode::INVALID_ARGUMENT);
  EXPECT_THAT(ViolatedFields(s), Contains("candidate.evidence.training.capacity.hypothesis_count"));
  EXPECT_THAT(ViolatedFields(s), Contains("policy.failure_probability"));

  // A champion without a comparison, and paired counts off the candidate's set.
  r = Request(0.05, 0.05, 5, 100);
  r.mutable_champion()->set_champion_id("damage-screen-v7");
  s = Refused(r);
  EXPECT_EQ(s.error_code(), grpc::StatusCode::INVALID_ARGUMENT);
  EXPECT_THAT(ViolatedFields(s), Contains("champion"));
  r.mutable_champion()->mutable_paired()->set_sample_count(99);
  r.mutable_champion()->mutable_paired()->set_only_challenger_wrong_count(5);
  s = Refused(r);
  EXPECT_EQ(s.error_code(), grpc::StatusCode::INVALID_ARGUMENT);
  EXPECT_THAT(ViolatedFields(s), Contains("champion.paired.sample_count"));

  // No policy at all: every required policy field is named.
  r = Request(0.05, 0.05, 5, 100);
  r.clear_policy();
  s = Refused(r);
  EXPECT_EQ(s.error_code(), grpc::StatusCode::INVALID_ARGUMENT);
  EXPECT_THAT(ViolatedFields(s), Contains("policy.max_risk"));
  EXPECT_THAT(ViolatedFields(s), Contains("policy.failure_probability"));
}

}  // namespace
}  // namespace riskbound::rpc
