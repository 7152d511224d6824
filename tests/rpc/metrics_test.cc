// Metrics rendering in the Prometheus text exposition format (open standard:
// Prometheus "Exposition formats", text format 0.0.4).
#include "service/rpc/metrics.h"

#include <string>

#include "gmock/gmock.h"
#include "gtest/gtest.h"

namespace riskbound::rpc {
namespace {

using ::testing::HasSubstr;

TEST(MetricsTest, LabelValuesAreEscaped) {
  // The format escapes backslash, double quote and line feed in label values.
  EXPECT_EQ(PrometheusLabelValue("a\\b\"c\nd"), "a\\\\b\\\"c\\nd");
  EXPECT_EQ(PrometheusLabelValue("plain-text_1.2"), "plain-text_1.2");
}

TEST(MetricsTest, HistogramIsCumulativeWithInfEqualToCount) {
  Metrics m("1.2.3", "abc", [] { return 5; });
  m.RecordCall("grpc", "Certify", absl::StatusCode::kOk, absl::Microseconds(50));
  m.RecordCall("grpc", "Certify", absl::StatusCode::kOk, absl::Milliseconds(3));
  m.RecordCall("grpc", "Certify", absl::StatusCode::kInvalidArgument, absl::Seconds(30));
  const std::string text = m.Render();
  EXPECT_THAT(text, HasSubstr("riskbound_build_info{version=\"1.2.3\",commit=\"abc\"} 1\n"));
  EXPECT_THAT(text, HasSubstr("riskbound_calls_in_flight 5\n"));
  EXPECT_THAT(text, HasSubstr(
      "riskbound_calls_total{transport=\"grpc\",rpc=\"Certify\",code=\"OK\"} 2\n"));
  EXPECT_THAT(text, HasSubstr("riskbound_calls_total{transport=\"grpc\",rpc=\"Certify\","
                              "code=\"INVALID_ARGUMENT\"} 1\n"));
  // 50 us falls in the first bucket (0.0001 s), 3 ms in le=0.005 and later,
  // 30 s only in +Inf.
  EXPECT_THAT(text, HasSubstr("riskbound_call_duration_seconds_bucket{rpc=\"Certify\","
                              "le=\"0.0001\"} 1\n"));
  EXPECT_THAT(text, HasSubstr("riskbound_call_duration_seconds_bucket{rpc=\"Certify\","
                              "le=\"0.0025\"} 1\n"));
  EXPECT_THAT(text, HasSubstr("riskbound_call_duration_seconds_bucket{rpc=\"Certify\","
                              "le=\"0.005\"} 2\n"));
  EXPECT_THAT(text, HasSubstr("riskbound_call_duration_seconds_bucket{rpc=\"Certify\","
                              "le=\"10\"} 2\n"));
  EXPECT_THAT(text, HasSubstr("riskbound_call_duration_seconds_bucket{rpc=\"Certify\","
                              "le=\"+Inf\"} 3\n"));
  EXPECT_THAT(text, HasSubstr("riskbound_call_duration_seconds_count{rpc=\"Certify\"} 3\n"));
  EXPECT_THAT(text, HasSubstr("riskbound_call_duration_seconds_sum{rpc=\"Certify\"} 30.00305\n"));
}

TEST(MetricsTest, VerdictsFamiliesRefusalsAndLimits) {
  Metrics m("1.0.0", "unknown");
  m.RecordVerdict("HOLD");
  m.RecordVerdict("HOLD");
  m.RecordCertificate("holdout-kl");
  m.RecordRefusal("busy");
  m.SetLimit("max_call_seconds", 2.5);
  const std::string text = m.Render();
  EXPECT_THAT(text, HasSubstr("riskbound_gate_verdicts_total{verdict=\"HOLD\"} 2\n"));
  EXPECT_THAT(text, HasSubstr("riskbound_certificates_total{family=\"holdout-kl\"} 1\n"));
  EXPECT_THAT(text, HasSubstr("riskbound_calls_refused_total{reason=\"busy\"} 1\n"));
  EXPECT_THAT(text, HasSubstr("riskbound_limit{name=\"max_call_seconds\"} 2.5\n"));
  EXPECT_THAT(text, ::testing::Not(HasSubstr("riskbound_calls_in_flight")));
}

}  // namespace
}  // namespace riskbound::rpc
