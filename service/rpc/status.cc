#include "service/rpc/status.h"

#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "google/rpc/error_details.pb.h"
#include "google/rpc/status.pb.h"
#include "service/core/field_violation.h"

namespace riskbound::rpc {
namespace {

// Length of the base64 form of `n` bytes, padding included (an upper bound
// for the unpadded form gRPC sends).
std::size_t Base64Size(std::size_t n) { return 4 * ((n + 2) / 3); }

// The serialized google.rpc.Status: code, message, a BadRequest with the
// first `keep` listed violations (and a summary violation counting
// `unlisted` more), and an ErrorInfo counting them all.
std::string Details(int code, const std::string& message,
                    const std::vector<core::FieldViolation>& listed, std::size_t keep,
                    std::uint64_t unlisted) {
  google::rpc::BadRequest bad_request;
  for (std::size_t i = 0; i < keep; ++i) {
    google::rpc::BadRequest::FieldViolation* out = bad_request.add_field_violations();
    out->set_field(listed[i].field);
    out->set_description(listed[i].description);
  }
  if (unlisted > 0) {
    const core::FieldViolation summary = core::SummaryViolation(unlisted);
    google::rpc::BadRequest::FieldViolation* out = bad_request.add_field_violations();
    out->set_field(summary.field);
    out->set_description(summary.description);
  }
  google::rpc::ErrorInfo info;
  info.set_reason(kInvalidFieldsReason);
  info.set_domain(kErrorDomain);
  (*info.mutable_metadata())["violation_count"] = absl::StrCat(keep + unlisted);
  (*info.mutable_metadata())["listed_violation_count"] = absl::StrCat(keep);
  google::rpc::Status status;
  status.set_code(code);
  status.set_message(message);
  status.add_details()->PackFrom(bad_request);
  status.add_details()->PackFrom(info);
  return status.SerializeAsString();
}

}  // namespace

std::size_t PercentEncodedSize(absl::string_view text) {
  std::size_t size = 0;
  for (const char ch : text) {
    const unsigned char c = static_cast<unsigned char>(ch);
    size += (c < 0x20 || c > 0x7E || c == '%') ? 3 : 1;
  }
  return size;
}

grpc::Status ToGrpcStatus(const absl::Status& status) {
  if (status.ok()) return grpc::Status::OK;
  const auto code = static_cast<grpc::StatusCode>(status.code());
  // Idempotent: a message made by core::InvalidFields passes unchanged.
  const std::string message = core::SanitizeText(status.message(), core::kMaxMessageBytes);
  core::ViolationReport report = core::ViolationReportOf(status);
  if (report.listed.empty() && report.unlisted_count == 0) return grpc::Status(code, message);
  for (core::FieldViolation& v : report.listed) {
    v.field = core::SanitizeText(v.field, core::kMaxFieldPathBytes);
    v.description = core::SanitizeText(v.description, core::kMaxDescriptionBytes);
  }
  // Message <= 512 bytes, so <= 1536 percent-encoded: >= 3584 bytes remain.
  const std::size_t details_budget = kTrailerBudgetBytes - PercentEncodedSize(message);
  const std::size_t listed = report.listed.size();
  for (std::size_t keep = listed;; --keep) {
    std::string details = Details(static_cast<int>(status.code()), message, report.listed,
                                  keep, report.unlisted_count + (listed - keep));
    // With no violation kept the details are the message, one summary and
    // the ErrorInfo: at most ~800 bytes, always within the budget.
    if (Base64Size(details.size()) <= details_budget || keep == 0) {
      return grpc::Status(code, message, std::move(details));
    }
  }
}

}  // namespace riskbound::rpc
