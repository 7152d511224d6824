#include "client_cli/json_io.h"

#include <fstream>
#include <iostream>
#include <iterator>
#include <sstream>

#include "absl/strings/str_cat.h"
#include "google/protobuf/util/json_util.h"

namespace riskbound::cli {

absl::StatusOr<std::string> ReadInput(const std::string& path) {
  std::stringstream buffer;
  if (path == "-") {
    buffer << std::cin.rdbuf();
    return buffer.str();
  }
  std::ifstream in(path, std::ios::binary);
  if (!in) return absl::NotFoundError(absl::StrCat("cannot read ", path));
  buffer << in.rdbuf();
  return buffer.str();
}

absl::Status ParseJson(const std::string& json, const std::string& source,
                       google::protobuf::Message* message) {
  google::protobuf::util::JsonParseOptions options;
  options.ignore_unknown_fields = false;
  const auto status = google::protobuf::util::JsonStringToMessage(json, message, options);
  if (status.ok()) return absl::OkStatus();
  return absl::InvalidArgumentError(
      absl::StrCat(source, ": not a valid ", message->GetDescriptor()->full_name(),
                   " in the protobuf JSON mapping: ", status.message().as_string()));
}

std::string ToJson(const google::protobuf::Message& message) {
  google::protobuf::util::JsonPrintOptions options;
  options.add_whitespace = true;
  options.always_print_primitive_fields = true;
  std::string out;
  // Printing a valid message cannot fail.
  (void)google::protobuf::util::MessageToJsonString(message, &out, options);
  return out;
}

}  // namespace riskbound::cli
