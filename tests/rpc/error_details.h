// Reading the standard error details of an answer, as any gRPC client does:
// the "grpc-status-details-bin" trailer holds a google.rpc.Status whose
// details are Any messages, each found by its type URL (the standard ones,
// "type.googleapis.com/google.rpc.BadRequest" and
// "type.googleapis.com/google.rpc.ErrorInfo"; open standard:
// googleapis google/rpc/status.proto and error_details.proto).
#ifndef RISKBOUND_TESTS_RPC_ERROR_DETAILS_H_
#define RISKBOUND_TESTS_RPC_ERROR_DETAILS_H_

#include <optional>
#include <string>
#include <utility>
#include <vector>

#include "google/rpc/error_details.pb.h"
#include "google/rpc/status.pb.h"
#include "grpcpp/support/status.h"
#include "gtest/gtest.h"

namespace riskbound::testing {

inline constexpr char kBadRequestTypeUrl[] = "type.googleapis.com/google.rpc.BadRequest";
inline constexpr char kErrorInfoTypeUrl[] = "type.googleapis.com/google.rpc.ErrorInfo";

// DetailsOf
// The google.rpc.Status of the trailer; nullopt when there is none or it does
// not decode.
inline std::optional<google::rpc::Status> DetailsOf(const grpc::Status& status) {
  google::rpc::Status out;
  if (status.error_details().empty() || !out.ParseFromString(status.error_details())) {
    return std::nullopt;
  }
  return out;
}

// BadRequestOf
// The google.rpc.BadRequest packed under its standard type URL; nullopt when
// absent.
inline std::optional<google::rpc::BadRequest> BadRequestOf(const grpc::Status& status) {
  const std::optional<google::rpc::Status> details = DetailsOf(status);
  if (!details.has_value()) return std::nullopt;
  for (const auto& any : details->details()) {
    google::rpc::BadRequest out;
    if (any.type_url() == kBadRequestTypeUrl && any.UnpackTo(&out)) return out;
  }
  return std::nullopt;
}

// ErrorInfoOf
// The google.rpc.ErrorInfo packed under its standard type URL; nullopt when
// absent.
inline std::optional<google::rpc::ErrorInfo> ErrorInfoOf(const grpc::Status& status) {
  const std::optional<google::rpc::Status> details = DetailsOf(status);
  if (!details.has_value()) return std::nullopt;
  for (const auto& any : details->details()) {
    google::rpc::ErrorInfo out;
    if (any.type_url() == kErrorInfoTypeUrl && any.UnpackTo(&out)) return out;
  }
  return std::nullopt;
}

// ViolationsOf
// (field, description) of every violation of the BadRequest, in order.
inline std::vector<std::pair<std::string, std::string>> ViolationsOf(
    const grpc::Status& status) {
  std::vector<std::pair<std::string, std::string>> out;
  if (const auto bad = BadRequestOf(status)) {
    for (const auto& v : bad->field_violations()) out.emplace_back(v.field(), v.description());
  }
  return out;
}

// ViolatedFieldsOf
// The field paths of every violation, in order.
inline std::vector<std::string> ViolatedFieldsOf(const grpc::Status& status) {
  std::vector<std::string> out;
  for (auto& [field, description] : ViolationsOf(status)) out.push_back(std::move(field));
  return out;
}

}  // namespace riskbound::testing

#endif  // RISKBOUND_TESTS_RPC_ERROR_DETAILS_H_
