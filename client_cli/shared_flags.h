// Flags more than one command reads the same way: the gate policy's inline
// flags (gate, score) and the family choice (certify, score).
#ifndef RISKBOUND_CLIENT_CLI_SHARED_FLAGS_H_
#define RISKBOUND_CLIENT_CLI_SHARED_FLAGS_H_

#include <optional>
#include <string>
#include <vector>

#include <ostream>

#include "client_cli/args.h"
#include "client_cli/slices_file.h"
#include "riskbound/v1/certify.pb.h"
#include "riskbound/v1/gate.pb.h"

namespace riskbound::cli {

// PolicyFlagSpecs
// --max-risk, --failure-probability (--delta), --max-regression,
// --min-holdout-sample-count, --plan-pass-probability, --allowed-families.
std::vector<OptionSpec> PolicyFlagSpecs();

// ApplyPolicyFlags
// Sets each policy field whose flag was given (overriding a file's value).
// Returns a usage message on error.
std::optional<std::string> ApplyPolicyFlags(const ParsedArgs& args, v1::GatePolicy* policy);

// ApplyFamilies
// Applies --families (a list, or "all") and --delta-weights to `req`'s
// family_choice. Returns a usage message on error.
std::optional<std::string> ApplyFamilies(const ParsedArgs& args, v1::CertifyRequest* req);

// SliceFlagSpecs
// --slices FILE and --slice-sharing bonferroni|sidak (certify, gate).
std::vector<OptionSpec> SliceFlagSpecs();

// What --slices and --slice-sharing gave.
struct SliceFlags {
  std::optional<SlicesFile> file;          // --slices
  std::optional<v1::SliceShareRule> rule;  // --slice-sharing
};

// ReadSliceFlags
// Reads --slices (the file, slices_file.h) and --slice-sharing. Returns
// nullopt when they are fine (or absent); else the exit code after writing
// "riskbound <command>: ..." to `err`: kExitUsage for a bad --slice-sharing
// word, kExitInvalidInput for a file that cannot be read or has a bad row
// (its line and column named).
std::optional<int> ReadSliceFlags(const std::string& command, const ParsedArgs& args,
                                  SliceFlags* out, std::ostream& err);

}  // namespace riskbound::cli

#endif  // RISKBOUND_CLIENT_CLI_SHARED_FLAGS_H_
