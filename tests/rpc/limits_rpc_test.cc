// Request size caps and bounded errors through a real server on a loopback
// channel (issue: memory and trailer amplification): every oversized list is
// refused with one violation naming it, an ordinary bad request with many bad
// fields reaches a default client as INVALID_ARGUMENT (not RESOURCE_EXHAUSTED
// from trailers over the client's 8 KiB limit), the trailers stay under
// 6 KiB with the worst strings a caller can put in them, the server's memory
// stays bounded, and a newline in an id cannot forge a violation. Each
// request is sent plain and gzip-compressed.
#include <chrono>
#include <cstdint>
#include <fstream>
#include <iostream>
#include <string>
#include <vector>

#include "absl/strings/match.h"
#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "gmock/gmock.h"
#include "grpcpp/client_context.h"
#include "gtest/gtest.h"
#include "riskbound/v1/riskbound.grpc.pb.h"
#include "service/core/field_violation.h"
#include "service/core/limits.h"
#include "service/rpc/status.h"
#include "tests/testing/loopback_server.h"
#include "tests/rpc/error_details.h"

namespace riskbound::rpc {
namespace {

using ::testing::Contains;
using ::testing::Each;
using ::testing::ElementsAre;
using ::testing::HasSubstr;
using ::testing::Not;
using ::testing::SizeIs;
using ::testing::StartsWith;

// gRPC's default limit on the metadata a client accepts (8 KiB; common
// practice, GRPC_ARG_MAX_METADATA_SIZE default) and this service's promise,
// well under it.
constexpr std::size_t kTrailerPromise = 6 * 1024;

// Base64 length of n bytes (RFC 4648 section 4, padded: an upper bound for
// the unpadded form gRPC sends binary metadata in).
std::size_t Base64Length(std::size_t n) { return 4 * ((n + 2) / 3); }

// Length of a grpc-message on the wire. Source: gRPC over HTTP/2
// (PROTOCOL-HTTP2.md, "Status-Message"): bytes outside 0x20-0x7E, and '%',
// are sent as %XX. Written out here independently of the server's code.
std::size_t PercentEncodedLength(const std::string& s) {
  std::size_t n = 0;
  for (char ch : s) {
    const auto c = static_cast<unsigned char>(ch);
    n += (c < 0x20 || c > 0x7E || c == '%') ? 3 : 1;
  }
  return n;
}

struct Answer {
  grpc::Status status;
  // HPACK size of the trailers as sent: name + value + 32 per entry (RFC 7541
  // section 4.1), binary values in base64; grpc-status and grpc-message,
  // which the client library takes out of the map, added as they travel.
  std::size_t trailer_bytes = 0;
  std::vector<std::pair<std::string, std::string>> violations;
};

Answer Finish(const grpc::ClientContext& context, const grpc::Status& status) {
  Answer a;
  a.status = status;
  bool details_trailer = false;
  for (const auto& [key, value] : context.GetServerTrailingMetadata()) {
    const std::string k(key.data(), key.size());
    details_trailer = details_trailer || k == "grpc-status-details-bin";
    a.trailer_bytes +=
        k.size() + (absl::EndsWith(k, "-bin") ? Base64Length(value.size()) : value.size()) + 32;
  }
  a.trailer_bytes += std::string("grpc-status").size() + 2 + 32;
  a.trailer_bytes +=
      std::string("grpc-message").size() + PercentEncodedLength(status.error_message()) + 32;
  // The details are measured where they travel.
  EXPECT_EQ(details_trailer, !status.error_details().empty());
  if (const auto detail = ::riskbound::testing::DetailsOf(status)) {
    EXPECT_EQ(detail->code(), static_cast<int>(status.error_code()));
    EXPECT_EQ(detail->message(), status.error_message());
    a.violations = ::riskbound::testing::ViolationsOf(status);
    // The ErrorInfo counts every violation: those listed (the summary
    // excluded) plus the summary's N.
    const auto info = ::riskbound::testing::ErrorInfoOf(status);
    EXPECT_TRUE(info.has_value());
    if (info.has_value() && !a.violations.empty()) {
      std::uint64_t listed = a.violations.size();
      std::uint64_t more = 0;
      const std::string& last = a.violations.back().second;
      if (a.violations.back().first == "request" && absl::StartsWith(last, "and ")) {
        --listed;
        EXPECT_TRUE(absl::SimpleAtoi(last.substr(4, last.find(' ', 4) - 4), &more)) << last;
      }
      EXPECT_EQ(info->metadata().at("listed_violation_count"), absl::StrCat(listed));
      EXPECT_EQ(info->metadata().at("violation_count"), absl::StrCat(listed + more));
    }
  }
  return a;
}

std::vector<std::string> Fields(const Answer& a) {
  std::vector<std::string> out;
  for (const auto& [field, description] : a.violations) out.push_back(field);
  return out;
}

// Peak resident set of this process (server and client share it), bytes.
std::int64_t PeakRssBytes() {
  std::ifstream status("/proc/self/status");
  std::string line;
  while (std::getline(status, line)) {
    if (absl::StartsWith(line, "VmHWM:")) {
      std::int64_t kb = 0;
      std::string digits;
      for (char c : line) {
        if (c >= '0' && c <= '9') digits.push_back(c);
      }
      if (absl::SimpleAtoi(digits, &kb)) return kb * 1024;
    }
  }
  return -1;
}

// Resets the peak to the current resident set (Linux: write 5 to
// /proc/self/clear_refs). False when the kernel does not allow it.
bool ResetPeakRss() {
  std::ofstream clear("/proc/self/clear_refs");
  if (!clear) return false;
  clear << "5";
  return static_cast<bool>(clear.flush());
}

class LimitsRpcTest : public ::riskbound::testing::LoopbackServerTest,
                      public ::testing::WithParamInterface<bool> {
 protected:
  // A context with a generous deadline (a guard against a hang, not a speed
  // target: before the caps these calls ran for minutes or never finished)
  // and, for the gzip variant, a compressed request.
  std::unique_ptr<grpc::ClientContext> Context() {
    auto context = ::riskbound::testing::CallContext(std::chrono::seconds(120));
    if (GetParam()) context->set_compression_algorithm(GRPC_COMPRESS_GZIP);
    return context;
  }

  Answer Certify(const v1::CertifyRequest& req) {
    auto context = Context();
    v1::CertifyResponse resp;
    const grpc::Status s = stub_->Certify(context.get(), req, &resp);
    return Finish(*context, s);
  }
  Answer Estimate(const v1::EstimateCapacityRequest& req) {
    auto context = Context();
    v1::EstimateCapacityResponse resp;
    const grpc::Status s = stub_->EstimateCapacity(context.get(), req, &resp);
    return Finish(*context, s);
  }
  Answer Gate(const v1::GateRequest& req) {
    auto context = Context();
    v1::GateResponse resp;
    const grpc::Status s = stub_->Gate(context.get(), req, &resp);
    return Finish(*context, s);
  }
  Answer Select(const v1::SelectStructureRequest& req) {
    auto context = Context();
    v1::SelectStructureResponse resp;
    const grpc::Status s = stub_->SelectStructure(context.get(), req, &resp);
    return Finish(*context, s);
  }
  Answer Plan(const v1::PlanSamplesRequest& req) {
    auto context = Context();
    v1::PlanSamplesResponse resp;
    const grpc::Status s = stub_->PlanSamples(context.get(), req, &resp);
    return Finish(*context, s);
  }

  // Checks an answer to an oversized request: INVALID_ARGUMENT, the field
  // named first with "at most <cap> entries, got <size>", trailers under the
  // promise.
  static void ExpectRefusedOversized(const Answer& a, const std::string& field, std::size_t cap,
                                     std::size_t size) {
    EXPECT_EQ(a.status.error_code(), grpc::StatusCode::INVALID_ARGUMENT)
        << a.status.error_message();
    ASSERT_FALSE(a.violations.empty());
    EXPECT_EQ(a.violations[0].first, field);
    EXPECT_EQ(a.violations[0].second, absl::StrCat("at most ", cap, " entries, got ", size));
    EXPECT_LE(a.violations.size(), core::kMaxListedViolations + 1);
    EXPECT_THAT(a.status.error_message(),
                StartsWith(absl::StrCat(field, ": at most ", cap, " entries")));
    EXPECT_LT(a.trailer_bytes, kTrailerPromise);
  }

  // The server's peak memory while running `call` stays within `bound`
  // bytes of what the process held before (the request itself included).
  template <typename Call>
  void ExpectPeakMemoryBelow(std::int64_t bound, Call call) {
    const bool reset = ResetPeakRss();
    const std::int64_t before = PeakRssBytes();
    call();
    const std::int64_t after = PeakRssBytes();
    if (!reset || before < 0 || after < 0) {
      GTEST_SKIP() << "peak RSS cannot be reset or read here";
    }
    EXPECT_LT(after - before, bound) << "peak RSS grew by " << (after - before) << " bytes";
    std::cout << "peak RSS growth during the call: " << (after - before) / 1024 << " KiB\n";
  }
};

v1::StructureCandidate* AddCandidate(v1::SelectStructureRequest* req, const std::string& id,
                                     std::uint64_t samples, std::uint64_t h) {
  v1::StructureCandidate* c = req->add_structure();
  c->set_id(id);
  c->set_error_count(0);
  c->set_sample_count(samples);
  c->mutable_capacity()->set_vc_dimension(h);
  return c;
}

v1::SelectStructureRequest Structure() {
  v1::SelectStructureRequest req;
  req.set_family(v1::BOUND_FAMILY_VC_ADDITIVE);
  req.set_failure_probability(0.05);
  return req;
}

// The ordinary bad request of the issue: 40 candidates, sample_count 0
// everywhere. Before the cap its 40 violations made trailers over 8 KiB and
// the client saw RESOURCE_EXHAUSTED.
TEST_P(LimitsRpcTest, FortyBadCandidatesAreInvalidArgumentWithTwentyListed) {
  v1::SelectStructureRequest req = Structure();
  for (int i = 0; i < 40; ++i) AddCandidate(&req, absl::StrCat("class-", i), 0, i + 1);
  const Answer a = Select(req);
  ASSERT_EQ(a.status.error_code(), grpc::StatusCode::INVALID_ARGUMENT)
      << a.status.error_message();
  ASSERT_THAT(a.violations, SizeIs(core::kMaxListedViolations + 1));
  for (std::size_t i = 0; i < core::kMaxListedViolations; ++i) {
    EXPECT_EQ(a.violations[i].first, absl::StrCat("structure[", i, "].sample_count"));
    EXPECT_EQ(a.violations[i].second, "must be at least 1");
  }
  EXPECT_EQ(a.violations.back().first, "request");
  EXPECT_EQ(a.violations.back().second, "and 20 more invalid fields were not listed");
  EXPECT_LE(a.status.error_message().size(), core::kMaxMessageBytes);
  EXPECT_THAT(a.status.error_message(),
              StartsWith("structure[0].sample_count: must be at least 1; "));
  EXPECT_LT(a.trailer_bytes, kTrailerPromise);
  std::cout << "40 bad candidates: trailer bytes " << a.trailer_bytes << "\n";
}

TEST_P(LimitsRpcTest, CertifyWithHundredThousandBadFamiliesNamesTheList) {
  v1::CertifyRequest req;
  req.mutable_evidence()->mutable_holdout()->set_error_count(3);
  req.mutable_evidence()->mutable_holdout()->set_sample_count(1000);
  req.set_failure_probability(0.05);
  for (int i = 0; i < 100000; ++i) req.mutable_listed()->add_families(v1::BoundFamily(1000 + i % 7));
  ExpectPeakMemoryBelow(256 << 20, [&] {
    ExpectRefusedOversized(Certify(req), "listed.families", core::kMaxListedFamilies, 100000);
  });
}

TEST_P(LimitsRpcTest, CertifyWithAMillionFamiliesAndWeightsNamesBothLists) {
  // About 3 MB on the wire (a few kB gzip-compressed), like the request that
  // drove the server to 3.78 GB.
  v1::CertifyRequest req;
  req.mutable_evidence()->mutable_holdout()->set_sample_count(0);  // also bad
  req.set_failure_probability(0.05);
  for (int i = 0; i < 1000000; ++i) {
    req.mutable_listed()->add_families(v1::BoundFamily(100000));
  }
  for (int i = 0; i < 100; ++i) req.mutable_listed()->add_delta_weights(-1.0);
  ExpectPeakMemoryBelow(256 << 20, [&] {
    const Answer a = Certify(req);
    ExpectRefusedOversized(a, "listed.families", core::kMaxListedFamilies, 1000000);
    EXPECT_THAT(Fields(a), Contains("listed.delta_weights"));
    EXPECT_THAT(Fields(a), Contains("evidence.holdout.sample_count"));
  });
}

TEST_P(LimitsRpcTest, TwoMillionZeroLayerWidthsAreOneViolation) {
  v1::EstimateCapacityRequest req;
  req.mutable_model()->set_kind(v1::MODEL_KIND_RELU_NETWORK);
  for (int i = 0; i < 2000000; ++i) req.mutable_model()->add_layer_widths(0);
  ExpectPeakMemoryBelow(256 << 20, [&] {
    const Answer a = Estimate(req);
    ExpectRefusedOversized(a, "model.layer_widths", core::kMaxLayerWidths, 2000000);
    EXPECT_THAT(a.violations, SizeIs(1));
  });
}

TEST_P(LimitsRpcTest, OversizedModelInsideCertifyAndPlanIsNamedAtItsPath) {
  v1::ModelDescription model;
  model.set_kind(v1::MODEL_KIND_RELU_NETWORK);
  for (int i = 0; i < 2000000; ++i) model.add_layer_widths(0);

  v1::CertifyRequest certify;
  auto* t = certify.mutable_evidence()->mutable_training();
  t->set_error_count(1);
  t->set_sample_count(1000);
  *t->mutable_capacity()->mutable_model() = model;
  certify.set_failure_probability(0.05);
  const Answer c = Certify(certify);
  ExpectRefusedOversized(c, "evidence.training.capacity.model.layer_widths",
                         core::kMaxLayerWidths, 2000000);
  EXPECT_THAT(c.violations, SizeIs(1));

  v1::PlanSamplesRequest plan;
  auto* p = plan.mutable_training();
  p->set_family(v1::BOUND_FAMILY_VC_ADDITIVE);
  *p->mutable_capacity()->mutable_model() = model;
  p->set_target_risk(0.1);
  p->set_failure_probability(0.05);
  ExpectRefusedOversized(Plan(plan), "training.capacity.model.layer_widths",
                         core::kMaxLayerWidths, 2000000);

  // At the cap the widths are checked one by one as before (0 is refused).
  v1::EstimateCapacityRequest at_cap;
  at_cap.mutable_model()->set_kind(v1::MODEL_KIND_RELU_NETWORK);
  for (std::size_t i = 0; i < core::kMaxLayerWidths; ++i) {
    at_cap.mutable_model()->add_layer_widths(i == 0 ? 0 : 1);
  }
  const Answer a = Estimate(at_cap);
  EXPECT_EQ(a.status.error_code(), grpc::StatusCode::INVALID_ARGUMENT);
  EXPECT_THAT(Fields(a), ElementsAre("model.layer_widths[0]"));
}

TEST_P(LimitsRpcTest, ModelAtTheCapWithEveryWidthZeroIsCountedUnderItsPath) {
  // 1000 zero widths: the core finds 1000 violations; the answer lists 19
  // and one on the model itself counts the other 981, and the request's
  // summary counts them in the details (violation_count 1000: 20 listed and
  // 980 more; it said 20 before the summary's also_counts).
  v1::CertifyRequest req;
  auto* t = req.mutable_evidence()->mutable_training();
  t->set_error_count(1);
  t->set_sample_count(1000);
  v1::ModelDescription* model = t->mutable_capacity()->mutable_model();
  model->set_kind(v1::MODEL_KIND_RELU_NETWORK);
  for (std::size_t i = 0; i < core::kMaxLayerWidths; ++i) model->add_layer_widths(0);
  req.set_failure_probability(0.05);
  const Answer a = Certify(req);
  ASSERT_EQ(a.status.error_code(), grpc::StatusCode::INVALID_ARGUMENT);
  ASSERT_THAT(a.violations, SizeIs(core::kMaxListedViolations + 1));
  for (std::size_t i = 0; i + 1 < core::kMaxListedViolations; ++i) {
    EXPECT_EQ(a.violations[i].first,
              absl::StrCat("evidence.training.capacity.model.layer_widths[", i, "]"));
  }
  EXPECT_EQ(a.violations[core::kMaxListedViolations - 1].first, "evidence.training.capacity.model");
  EXPECT_EQ(a.violations[core::kMaxListedViolations - 1].second,
            "and 981 more invalid fields of this model were not listed");
  EXPECT_EQ(a.violations.back().first, "request");
  EXPECT_EQ(a.violations.back().second, "and 980 more invalid fields were not listed");
  EXPECT_LT(a.trailer_bytes, kTrailerPromise);
}

TEST_P(LimitsRpcTest, GatePolicyWithAMillionAllowedFamiliesIsOneViolation) {
  v1::GateRequest req;
  req.mutable_policy()->set_max_risk(0.05);
  req.mutable_policy()->set_failure_probability(0.05);
  for (int i = 0; i < 1000000; ++i) req.mutable_policy()->add_allowed_families(v1::BoundFamily(0));
  req.mutable_candidate()->set_id("parcel-router-v3");
  req.mutable_candidate()->mutable_evidence()->mutable_holdout()->set_error_count(10);
  req.mutable_candidate()->mutable_evidence()->mutable_holdout()->set_sample_count(2000);
  ExpectPeakMemoryBelow(256 << 20, [&] {
    const Answer a = Gate(req);
    ExpectRefusedOversized(a, "policy.allowed_families", core::kMaxAllowedFamilies, 1000000);
    EXPECT_THAT(a.violations, SizeIs(1));
  });
}

TEST_P(LimitsRpcTest, GateIdsOverTheirCapAreNamed) {
  v1::GateRequest req;
  req.mutable_policy()->set_max_risk(0.05);
  req.mutable_policy()->set_failure_probability(0.05);
  req.mutable_candidate()->set_id(std::string(100000, '%'));
  req.mutable_candidate()->mutable_evidence()->mutable_holdout()->set_error_count(10);
  req.mutable_candidate()->mutable_evidence()->mutable_holdout()->set_sample_count(2000);
  req.mutable_champion()->set_champion_id(std::string(core::kMaxIdBytes + 1, 'c'));
  req.mutable_champion()->mutable_champion_holdout()->set_error_count(9);
  req.mutable_champion()->mutable_champion_holdout()->set_sample_count(2000);
  const Answer a = Gate(req);
  EXPECT_EQ(a.status.error_code(), grpc::StatusCode::INVALID_ARGUMENT);
  EXPECT_THAT(a.violations,
              ElementsAre(std::pair<std::string, std::string>("candidate.id",
                                                              "at most 256 bytes, got 100000"),
                          std::pair<std::string, std::string>("champion.champion_id",
                                                              "at most 256 bytes, got 257")));
  EXPECT_LT(a.trailer_bytes, kTrailerPromise);
}

TEST_P(LimitsRpcTest, HundredThousandCandidatesAreOneViolation) {
  // Before: the error merge was quadratic, 71 s of CPU for this request.
  v1::SelectStructureRequest req = Structure();
  for (int i = 0; i < 100000; ++i) {
    v1::StructureCandidate* c = req.add_structure();
    c->set_id(absl::StrCat(i));
    c->set_sample_count(0);  // and no capacity
  }
  req.set_delta_spread(v1::DELTA_SPREAD_CALLER_WEIGHTS);
  for (int i = 0; i < 100000; ++i) req.add_weights(2.0);
  ExpectPeakMemoryBelow(256 << 20, [&] {
    const Answer a = Select(req);
    ExpectRefusedOversized(a, "structure", core::kMaxStructureCandidates, 100000);
    EXPECT_THAT(Fields(a), ElementsAre("structure", "weights"));
  });
}

TEST_P(LimitsRpcTest, TenThousandBadCandidatesAtTheCapStayBounded) {
  // At the cap every candidate is checked (no capacity, sample_count 0): the
  // answer lists 20 and counts the rest.
  v1::SelectStructureRequest req = Structure();
  for (std::size_t i = 0; i < core::kMaxStructureCandidates; ++i) {
    v1::StructureCandidate* c = req.add_structure();
    c->set_id(absl::StrCat(i));
    c->set_sample_count(0);
  }
  const Answer a = Select(req);
  ASSERT_EQ(a.status.error_code(), grpc::StatusCode::INVALID_ARGUMENT);
  ASSERT_THAT(a.violations, SizeIs(core::kMaxListedViolations + 1));
  EXPECT_EQ(a.violations[0].first, "structure[0].capacity");
  EXPECT_EQ(a.violations.back().first, "request");
  // 10000 missing capacities, 10000 zero sample counts: 20000 in all.
  EXPECT_EQ(a.violations.back().second,
            absl::StrCat("and ", 20000 - core::kMaxListedViolations,
                         " more invalid fields were not listed"));
  EXPECT_LT(a.trailer_bytes, kTrailerPromise);
}

TEST_P(LimitsRpcTest, NewlineInAnIdCannotForgeAViolation) {
  // Duplicated ids: the core quotes the id in its description. With the old
  // line-based encoding the newline split it into a forged violation named
  // "forged.field".
  const std::string id = "a\nforged.field\tforged description\n%2e%0A";
  v1::SelectStructureRequest req = Structure();
  AddCandidate(&req, id, 100, 1);
  AddCandidate(&req, id, 100, 2);
  const Answer a = Select(req);
  ASSERT_EQ(a.status.error_code(), grpc::StatusCode::INVALID_ARGUMENT);
  ASSERT_THAT(a.violations, SizeIs(1));
  EXPECT_EQ(a.violations[0].first, "structure[1].id");
  EXPECT_EQ(a.violations[0].second,
            "id \"a\\nforged.field\\tforged description\\n%2e%0A\" is used twice");
  EXPECT_THAT(a.status.error_message(), Not(HasSubstr("\n")));
  EXPECT_THAT(a.status.error_message(), HasSubstr("%2e%0A"));  // '%' arrives intact
}

TEST_P(LimitsRpcTest, WorstCaseStringsKeepTrailersUnderSixKiB) {
  // Ids at their cap made of the bytes that cost most on the wire: '%' and
  // two-byte characters (each 3x percent-encoded), and control characters
  // (escaped to 4 bytes each), every id used twice so the core quotes it in
  // 39 descriptions.
  const std::vector<std::string> worst = {
      std::string(core::kMaxIdBytes, '%'),
      [] {
        std::string s;
        while (s.size() + 2 <= core::kMaxIdBytes) s += "\xc3\xa9";
        return s;
      }(),
      std::string(core::kMaxIdBytes, '\x01'),
      [] {
        std::string s;
        while (s.size() + 3 <= core::kMaxIdBytes) s += "\xe2\x80\xae";  // U+202E
        return s;
      }(),
  };
  for (const std::string& id : worst) {
    v1::SelectStructureRequest req = Structure();
    for (int i = 0; i < 40; ++i) AddCandidate(&req, id, 100, i + 1);
    const Answer a = Select(req);
    ASSERT_EQ(a.status.error_code(), grpc::StatusCode::INVALID_ARGUMENT)
        << a.status.error_message().substr(0, 200);
    EXPECT_LT(a.trailer_bytes, kTrailerPromise);
    EXPECT_LE(a.status.error_message().size(), core::kMaxMessageBytes);
    ASSERT_FALSE(a.violations.empty());
    EXPECT_LE(a.violations.size(), core::kMaxListedViolations + 1);
    EXPECT_EQ(a.violations[0].first, "structure[1].id");
    EXPECT_EQ(a.violations.back().first, "request");
    // Every violation listed or counted: the listed ones plus the summary's N.
    std::uint64_t more = 0;
    ASSERT_TRUE(absl::SimpleAtoi(
        a.violations.back().second.substr(4, a.violations.back().second.find(' ', 4) - 4),
        &more));
    EXPECT_EQ(a.violations.size() - 1 + more, 39u);
    std::cout << "worst-case trailer bytes: " << a.trailer_bytes << " with "
              << a.violations.size() << " violations, message "
              << PercentEncodedLength(a.status.error_message()) << " bytes encoded\n";
  }
}

INSTANTIATE_TEST_SUITE_P(PlainAndGzip, LimitsRpcTest, ::testing::Bool(),
                         [](const ::testing::TestParamInfo<bool>& info) {
                           return info.param ? std::string("Gzip") : std::string("Plain");
                         });

// ToGrpcStatus alone, on the worst status InvalidFields can make: 20
// violations with paths and descriptions at their caps, all '%' or two-byte
// characters, and a count in the millions.
TEST(ToGrpcStatusTest, WorstCaseFitsTheBudget) {
  std::string accents;
  while (accents.size() + 2 <= 1000) accents += "\xc3\xa9";
  for (const std::string& text : {std::string(1000, '%'), accents}) {
    const std::vector<core::FieldViolation> v(100, {text, text});
    const grpc::Status s = ToGrpcStatus(core::InvalidFields(v, 999900));
    ASSERT_EQ(s.error_code(), grpc::StatusCode::INVALID_ARGUMENT);
    const std::size_t cost =
        PercentEncodedLength(s.error_message()) + Base64Length(s.error_details().size());
    EXPECT_LE(cost, kTrailerBudgetBytes);
    EXPECT_LE(s.error_message().size(), core::kMaxMessageBytes);
    const auto bad_request = ::riskbound::testing::BadRequestOf(s);
    ASSERT_TRUE(bad_request.has_value());
    const google::rpc::BadRequest& violations = *bad_request;
    ASSERT_GE(violations.field_violations_size(), 2);
    const auto& summary = violations.field_violations(violations.field_violations_size() - 1);
    EXPECT_EQ(summary.field(), "request");
    EXPECT_EQ(summary.description(),
              absl::StrCat("and ", 1000000 - (violations.field_violations_size() - 1),
                           " more invalid fields were not listed"));
    std::cout << "ToGrpcStatus worst case: " << cost << " bytes, "
              << violations.field_violations_size() << " violations\n";
  }
}

TEST(ToGrpcStatusTest, OtherStatusesGetABoundedPrintableMessage) {
  const grpc::Status s = ToGrpcStatus(absl::InternalError(std::string(100000, '\n')));
  EXPECT_EQ(s.error_code(), grpc::StatusCode::INTERNAL);
  EXPECT_LE(s.error_message().size(), core::kMaxMessageBytes);
  EXPECT_THAT(s.error_message(), StartsWith("\\n\\n"));
  EXPECT_TRUE(s.error_details().empty());
}

}  // namespace
}  // namespace riskbound::rpc
