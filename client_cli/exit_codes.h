// Exit codes of the riskbound CLI (documented in README and `riskbound --help`).
#ifndef RISKBOUND_CLIENT_CLI_EXIT_CODES_H_
#define RISKBOUND_CLIENT_CLI_EXIT_CODES_H_

namespace riskbound::cli {

enum ExitCode : int {
  kExitOk = 0,                 // Success (for `gate`: verdict PROMOTE).
  kExitInternal = 1,           // Unexpected failure (server INTERNAL, UNKNOWN, ...).
  kExitUsage = 2,              // Bad command line: unknown command or flag, missing value.
  kExitInvalidInput = 3,       // The input was refused: INVALID_ARGUMENT (field named) or
                               // an unreadable or malformed input file.
  kExitUnreachable = 4,        // The server could not be reached in time.
  kExitTargetUnreachable = 5,  // `plan`: no sample size reaches the target risk (the
                               // answer and its reason are still printed).
  kExitServerLimit = 7,        // The server refused the call for its limits
                               // (RESOURCE_EXHAUSTED): busy (retry later), or the
                               // request or its answer is above its size limits.
  kExitUnauthenticated = 8,    // The server refused the credentials (UNAUTHENTICATED:
                               // no valid bearer token; PERMISSION_DENIED).
  kExitBenchErrors = 9,        // `bench`: some calls failed during the run (counted by code).
  kExitGateHold = 10,          // `gate`: verdict HOLD (more hold-out data needed).
  kExitGateReject = 11,        // `gate`: verdict REJECT.
  kExitRowErrors = 12,         // `score`: some rows are error rows (the others were written).
};

}  // namespace riskbound::cli

#endif  // RISKBOUND_CLIENT_CLI_EXIT_CODES_H_
