#include "service/rpc/status.h"

#include <string>

#include "riskbound/v1/common.pb.h"
#include "service/core/field_violation.h"

namespace riskbound::rpc {

grpc::Status ToGrpcStatus(const absl::Status& status) {
  if (status.ok()) return grpc::Status::OK;
  const auto code = static_cast<grpc::StatusCode>(status.code());
  const std::string message(status.message());
  const auto violations = core::FieldViolationsOf(status);
  if (violations.empty()) return grpc::Status(code, message);
  v1::FieldViolations detail;
  for (const core::FieldViolation& v : violations) {
    v1::FieldViolation* out = detail.add_field_violations();
    out->set_field(v.field);
    out->set_description(v.description);
  }
  v1::ErrorStatus error;
  error.set_code(static_cast<int>(status.code()));
  error.set_message(message);
  error.add_details()->PackFrom(detail);
  return grpc::Status(code, message, error.SerializeAsString());
}

}  // namespace riskbound::rpc
