// riskbound families: the bound families the server knows (RPC ListFamilies).
#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "client_cli/args.h"
#include "client_cli/client.h"
#include "client_cli/command_start.h"
#include "client_cli/commands.h"
#include "client_cli/exit_codes.h"
#include "client_cli/json_io.h"
#include "client_cli/names.h"
#include "riskbound/v1/families.pb.h"

namespace riskbound::cli {
namespace {

constexpr char kUsage[] = "riskbound families [--output table|json] [--server HOST:PORT]";
constexpr char kSummary[] =
    "Asks the server for every bound family it knows: the name certify --family takes (its\n"
    "enum name, e.g. BOUND_FAMILY_HOLDOUT_KL_CHERNOFF, is accepted too), a title, the evidence\n"
    "it needs, its published source and its assumptions. --output json prints the\n"
    "riskbound.v1.ListFamiliesResponse in the protobuf JSON mapping.\n"
    "\n"
    "exit codes: 0 listed; 2 usage; 4 server unreachable; 1 other failure.";

std::vector<OptionSpec> Specs() {
  std::vector<OptionSpec> specs = {
      {"output", "table|json", "output format (default table)"},
  };
  for (OptionSpec& s : ConnectionOptions()) specs.push_back(s);
  return specs;
}

}  // namespace

int RunFamilies(const std::vector<std::string>& args, std::ostream& out, std::ostream& err) {
  const std::vector<OptionSpec> specs = Specs();
  CommandStart start;
  if (auto code = StartCommand("families", kUsage, kSummary, specs, args, out, err, &start)) {
    return *code;
  }
  RiskBoundClient client(start.client);
  v1::ListFamiliesResponse response;
  auto ctx = client.NewContext();
  const grpc::Status status =
      client.stub()->ListFamilies(ctx.get(), v1::ListFamiliesRequest(), &response);
  if (!status.ok()) return ReportRpcError(status, client.options(), err);
  if (start.json) {
    out << ToJson(response);
    return kExitOk;
  }
  for (const v1::FamilyDescription& f : response.families()) {
    const std::string word =
        f.family_name().empty() ? FamilyWord(f.family()) : f.family_name();
    out << word << "  (" << v1::BoundFamily_Name(f.family()) << ")\n"
        << "  " << f.title() << "\n"
        << "  needs:       " << f.evidence_needed() << "\n"
        << "  source:      " << f.source() << "\n"
        << "  assumptions: " << f.assumptions() << "\n\n";
  }
  return kExitOk;
}

}  // namespace riskbound::cli
