// A small command-line parser for the CLI's per-command options.
//
// Options are declared per command (name, value name, help), so each command
// validates exactly its own flags and prints its own --help. Accepts
// "--name value", "--name=value" and bare "--name" for switches.
#ifndef RISKBOUND_CLIENT_CLI_ARGS_H_
#define RISKBOUND_CLIENT_CLI_ARGS_H_

#include <cstdint>
#include <map>
#include <optional>
#include <string>
#include <vector>

#include "absl/status/statusor.h"

namespace riskbound::cli {

struct OptionSpec {
  std::string name;        // without the leading "--"
  std::string value_name;  // empty for a switch that takes no value
  std::string help;
  bool repeatable = false;
  // Older or shorter spellings (without "--"), accepted as the same flag and
  // listed in --help. Values given under an alias are stored under `name`.
  std::vector<std::string> aliases = {};
};

class ParsedArgs {
 public:
  bool Has(const std::string& name) const { return values_.count(name) > 0; }
  // The last value given for `name`, or nullopt.
  std::optional<std::string> Get(const std::string& name) const;
  // Every value given for `name`, each split at commas.
  std::vector<std::string> GetList(const std::string& name) const;
  // REQUIRES: called by the parser only.
  void Add(const std::string& name, const std::string& value) { values_[name].push_back(value); }

  // Typed getters: nullopt when absent; INVALID_ARGUMENT naming the flag when
  // the text is not a number of that type (or not finite).
  absl::StatusOr<std::optional<std::uint64_t>> GetUint64(const std::string& name) const;
  absl::StatusOr<std::optional<double>> GetDouble(const std::string& name) const;

 private:
  std::map<std::string, std::vector<std::string>> values_;
};

// ParseArgs
// Parses `args` (the words after the command name) against `specs` plus the
// implicit --help (also -h) and --version switches, stored as "help" and
// "version". An alias is stored under its flag's name. Returns INVALID_ARGUMENT for an unknown flag, a
// missing value, a repeated non-repeatable flag, or a positional word.
absl::StatusOr<ParsedArgs> ParseArgs(const std::vector<OptionSpec>& specs,
                                     const std::vector<std::string>& args);

// FormatHelp
// Returns the usage text of one command: usage line, summary, option table
// (each flag with its aliases), then `terms` (the glossary of the command's
// output) when not empty.
std::string FormatHelp(const std::string& usage, const std::string& summary,
                       const std::vector<OptionSpec>& specs, const std::string& terms = "");

// EngineVersion
// The engine version this CLI was built with (RISKBOUND_ENGINE_VERSION).
const char* EngineVersion();

}  // namespace riskbound::cli

#endif  // RISKBOUND_CLIENT_CLI_ARGS_H_
