// Reading requests in the protobuf JSON mapping, and printing answers in it.
#ifndef RISKBOUND_CLIENT_CLI_JSON_IO_H_
#define RISKBOUND_CLIENT_CLI_JSON_IO_H_

#include <string>

#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "google/protobuf/descriptor.h"
#include "google/protobuf/message.h"

namespace riskbound::cli {

// ReadInput
// Returns the whole content of `path`, or of standard input for "-".
// NOT_FOUND / INVALID_ARGUMENT naming the path when it cannot be read.
absl::StatusOr<std::string> ReadInput(const std::string& path);

// ParseJson
// Parses `json` (protobuf JSON mapping; snake_case or lowerCamelCase field
// names; family and model-kind values also in their CLI spellings, see
// NormalizeEnumWords) into `message`. Unknown fields are errors. INVALID_ARGUMENT whose
// message names `source` and the offending field.
absl::Status ParseJson(const std::string& json, const std::string& source,
                       google::protobuf::Message* message);

// NormalizeEnumWords
// Returns `json` with every BoundFamily and ModelKind value written in a CLI
// spelling ("holdout-kl", "relu", "holdout_kl_chernoff", "RELU_NETWORK")
// replaced by its enum name, so that JSON files take every name the flags
// take. Values are found by walking `root` (the message the JSON fills)
// along the keys; anything else, and anything malformed, is left for the
// protobuf parser to judge.
std::string NormalizeEnumWords(const std::string& json, const google::protobuf::Descriptor* root);

// ToJson
// Returns `message` in the protobuf JSON mapping, indented, with fields at
// their default values printed too (a 0 upper bound is shown, not omitted).
std::string ToJson(const google::protobuf::Message& message);

}  // namespace riskbound::cli

#endif  // RISKBOUND_CLIENT_CLI_JSON_IO_H_
