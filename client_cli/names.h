// The CLI's names for the API's enums, read from the proto descriptors (no
// copy of the core's tables): every value is accepted as its CLI word
// ("holdout-kl", "relu") and as its enum name, with or without the prefix,
// in any case, with '-' or '_' ("BOUND_FAMILY_HOLDOUT_KL_CHERNOFF",
// "holdout_kl_chernoff", "MODEL_KIND_RELU_NETWORK", "relu-network").
#ifndef RISKBOUND_CLIENT_CLI_NAMES_H_
#define RISKBOUND_CLIENT_CLI_NAMES_H_

#include <optional>
#include <string>
#include <vector>

#include "absl/strings/string_view.h"
#include "riskbound/v1/capacity.pb.h"
#include "riskbound/v1/common.pb.h"
#include "riskbound/v1/gate.pb.h"

namespace riskbound::cli {

// FamilyFromName
// The family named by `name`, or nullopt (also for UNSPECIFIED).
std::optional<v1::BoundFamily> FamilyFromName(absl::string_view name);

// FamilyWord
// The CLI word of `family` ("holdout-binomial", "vc-additive"): the enum name
// without its prefix, lower case with '-', except where a shorter word is the
// CLI's (holdout-binomial, holdout-kl). "family <number>" for a value this
// CLI does not know.
std::string FamilyWord(int family);

// FamilyWords
// The CLI words of every family, in enum order.
std::vector<std::string> FamilyWords();

// UnknownFamilyMessage
// "unknown family 'x'; known: holdout-binomial, ... (or their enum names)".
std::string UnknownFamilyMessage(absl::string_view name);

// ModelKindFromEnumName
// The kind named by its enum name (with or without MODEL_KIND_, any case,
// '-' or '_'), or nullopt. CLI words are in model_flags.h.
std::optional<v1::ModelKind> ModelKindFromEnumName(absl::string_view name);

// EnumWord
// The enum value name without `prefix`, lower case, '_' as '-'
// ("MODEL_KIND_RELU_NETWORK", "MODEL_KIND_" -> "relu-network").
std::string EnumWord(absl::string_view enum_name, absl::string_view prefix);

// VerdictWord
// "PROMOTE", "HOLD" or "REJECT"; "UNSPECIFIED" for anything else.
const char* VerdictWord(v1::Verdict verdict);

}  // namespace riskbound::cli

#endif  // RISKBOUND_CLIENT_CLI_NAMES_H_
