// The start every networked command shares: parse its flags, answer --help,
// check --output and the connection flags, and report usage errors the same
// way everywhere.
#ifndef RISKBOUND_CLIENT_CLI_COMMAND_START_H_
#define RISKBOUND_CLIENT_CLI_COMMAND_START_H_

#include <optional>
#include <ostream>
#include <string>
#include <vector>

#include "client_cli/args.h"
#include "client_cli/client.h"
#include "google/protobuf/message.h"

namespace riskbound::cli {

// UsageError
// Writes "riskbound <name>: <message>" and a pointer to --help to `err`;
// returns kExitUsage.
int UsageError(std::ostream& err, const std::string& name, const std::string& message);

// What StartCommand leaves for the command.
struct CommandStart {
  ParsedArgs args;
  bool json = false;     // --output json (default table)
  ClientOptions client;  // --server, --timeout
};

// StartCommand
// Parses `args` against `specs` (which must include --output and the
// ConnectionOptions()). Returns kExitOk after printing the help (with the
// glossary `terms`) for --help or -h, or the engine version for --version,
// kExitUsage after a usage error (bad flag, --output other than table|json,
// bad --server/--timeout), or nullopt with *start filled to go on.
std::optional<int> StartCommand(const std::string& name, const std::string& usage,
                                const std::string& summary, const std::vector<OptionSpec>& specs,
                                const std::vector<std::string>& args, std::ostream& out,
                                std::ostream& err, CommandStart* start,
                                const std::string& terms = "");

// LoadJsonInput
// Reads `path` (- for stdin) into `message` (protobuf JSON mapping, unknown
// fields refused). Returns nullopt on success, else kExitInvalidInput after
// writing "riskbound <name>: <what is wrong>" to `err`.
std::optional<int> LoadJsonInput(const std::string& name, const std::string& path,
                                 google::protobuf::Message* message, std::ostream& err);

// PrintCautions
// Writes the "Cautions:" block every certifying or deciding output ends with.
template <typename Strings>
void PrintCautions(const Strings& cautions, std::ostream& out) {
  out << "\nCautions:\n";
  for (const auto& caution : cautions) out << "  - " << caution << "\n";
}

}  // namespace riskbound::cli

#endif  // RISKBOUND_CLIENT_CLI_COMMAND_START_H_
