// Model descriptions from the command line, shared by `riskbound capacity
// <kind> [flags]` and `riskbound certify --model <kind> [flags]`.
//
// A kind is named by a short CLI word (relu, tree, halfspace, ...) or by its
// API spelling (relu_network, decision-tree, ...); its size by the parameter
// flags below, each mapped to one riskbound.v1.ModelDescription field. Which
// flags a kind uses is checked by the server, which names the field
// ("model.degree: is not used by kind halfspace").
#ifndef RISKBOUND_CLIENT_CLI_MODEL_FLAGS_H_
#define RISKBOUND_CLIENT_CLI_MODEL_FLAGS_H_

#include <optional>
#include <string>
#include <vector>

#include "absl/strings/string_view.h"
#include "client_cli/args.h"
#include "riskbound/v1/capacity.pb.h"

namespace riskbound::cli {

// ModelKindFromName
// Returns the kind named by `name` (a CLI word, or the enum name with or
// without MODEL_KIND_, any case, '-' or '_'), or nullopt.
std::optional<v1::ModelKind> ModelKindFromName(absl::string_view name);

// ModelKindWord
// Returns the CLI word of `kind` ("relu"), or "unknown".
std::string ModelKindWord(v1::ModelKind kind);

// ModelKindHelp
// Returns one line per kind: its CLI word, what it is and the flags it uses.
std::string ModelKindHelp();

// ModelKindList
// Returns the CLI words of every kind, comma-separated.
std::string ModelKindList();

// CapacityOptions
// The capacity flags of commands that take one: --vc-dimension,
// --hypothesis-count, --log-hypothesis-count, --model KIND and the model
// parameter flags (their help prefixed "with --model:").
std::vector<OptionSpec> CapacityOptions();

// ModelParameterOptions
// The parameter flags (--dimension, --widths, ...), each naming its field.
std::vector<OptionSpec> ModelParameterOptions();

// AnyModelParameter
// True when `args` holds at least one parameter flag.
bool AnyModelParameter(const ParsedArgs& args);

// ModelFromFlags
// Fills `model` with `kind` and the parameter flags in `args`. Returns a
// usage message naming the flag when a value is not a number of the right
// type (a negative or non-integer count, an empty or malformed --widths).
std::optional<std::string> ModelFromFlags(v1::ModelKind kind, const ParsedArgs& args,
                                          v1::ModelDescription* model);

// DescribeModel
// Returns the model in a few words for people: "relu (layer widths
// 784,300,100,1)", the kind as `kind_text` (what the user typed) when not
// empty, else as its CLI word.
std::string DescribeModel(const v1::ModelDescription& model, const std::string& kind_text = "");

}  // namespace riskbound::cli

#endif  // RISKBOUND_CLIENT_CLI_MODEL_FLAGS_H_
