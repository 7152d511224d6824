#include "client_cli/commands.h"

#include "absl/strings/str_format.h"
#include "client_cli/args.h"
#include "client_cli/exit_codes.h"

namespace riskbound::cli {

// cmd_health.cc: the gRPC health probe.
int RunHealth(const std::vector<std::string>& args, std::ostream& out, std::ostream& err);

namespace {

constexpr char kOverview[] =
    "riskbound: certified upper bounds on a classifier's true error, from a riskbound-server.\n"
    "\n"
    "usage: riskbound <command> [options]      riskbound <command> --help\n"
    "       riskbound --version                (the engine version)\n"
    "\n"
    "commands:\n";

constexpr char kExitCodes[] =
    "\nexit codes:\n"
    "  0  success\n"
    "  1  unexpected failure\n"
    "  2  usage error (unknown command or flag, missing value)\n"
    "  3  invalid input (refused by the server with the field named, or an unreadable file)\n"
    "  4  server unreachable (unavailable, or no answer within --timeout)\n"
    "  5  plan: the target risk is unreachable (the reason is printed)\n"
    "  6  health: the server answered, but not SERVING\n"
    "  7  the server refused the call for its limits (busy, or a request or answer too large)\n"
    "  8  the server refused the credentials (no valid bearer token)\n"
    "  9  bench: some calls failed during the run (counted by status code)\n"
    "  10 gate: verdict HOLD (0 is PROMOTE)\n"
    "  11 gate: verdict REJECT\n"
    "  12 score: some rows are error rows (the other rows are written)\n"
    "\n"
    "Bounds assume i.i.d. samples from the deployment distribution; they say nothing about\n"
    "distribution shift, fairness or misuse, and never replace model-risk review.\n";

}  // namespace

const std::vector<Command>& Commands() {
  static const std::vector<Command>* const kCommands = new std::vector<Command>{
      {"certify", "certificates on one model's true error from its evidence", RunCertify},
      {"families", "list the bound families, their sources and assumptions", RunFamilies},
      {"capacity", "VC dimension of a model family from its architecture", RunCapacity},
      {"effective-vc", "effective VC dimension fit to measured deviations (heuristic)",
       RunEffectiveVc},
      {"gate", "PROMOTE, HOLD or REJECT a candidate model under a policy", RunGate},
      {"select", "choose along a nested model structure by the smallest bound (SRM)", RunSelect},
      {"plan", "hold-out or training sample size that reaches a target risk", RunPlan},
      {"score", "a whole model registry, one row per input row (JSONL or CSV)", RunScore},
      {"health", "the server's gRPC health status (exit 0 only when SERVING)", RunHealth},
      {"bench", "load the server and compare with the gRPC health check's throughput", RunBench},
  };
  return *kCommands;
}

int RunCli(const std::vector<std::string>& argv, std::ostream& out, std::ostream& err) {
  auto overview = [&](std::ostream& os) {
    os << kOverview;
    for (const Command& c : Commands()) os << absl::StrFormat("  %-10s %s\n", c.name, c.summary);
    os << kExitCodes;
  };
  if (argv.size() < 2) {
    overview(err);
    return kExitUsage;
  }
  const std::string& name = argv[1];
  if (name == "--help" || name == "-h" || name == "help") {
    overview(out);
    return kExitOk;
  }
  if (name == "--version") {
    out << "riskbound " << EngineVersion() << "\n";
    return kExitOk;
  }
  for (const Command& c : Commands()) {
    if (name == c.name) {
      return c.run(std::vector<std::string>(argv.begin() + 2, argv.end()), out, err);
    }
  }
  err << "riskbound: unknown command '" << name << "'\n\n";
  overview(err);
  return kExitUsage;
}

}  // namespace riskbound::cli
