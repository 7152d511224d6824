// riskbound families: the bound families this engine knows (no server needed).
#include "absl/strings/str_cat.h"
#include "client_cli/args.h"
#include "client_cli/commands.h"
#include "client_cli/exit_codes.h"
#include "service/core/families.h"

namespace riskbound::cli {

int RunFamilies(const std::vector<std::string>& args, std::ostream& out, std::ostream& err) {
  const std::vector<OptionSpec> specs;
  auto parsed = ParseArgs(specs, args);
  if (!parsed.ok()) {
    err << "riskbound families: " << parsed.status().message() << "\n";
    return kExitUsage;
  }
  if (parsed->Has("help")) {
    out << FormatHelp("riskbound families",
                      "Lists every bound family: its name (for certify --family), what it "
                      "needs, its source and its assumptions.",
                      specs);
    return kExitOk;
  }
  for (const core::FamilySpec& f : core::Families()) {
    out << f.slug << "\n"
        << "  " << f.title << "\n"
        << "  needs:       " << f.needs << "\n"
        << "  source:      " << f.source << "\n"
        << "  assumptions: " << f.assumptions << "\n\n";
  }
  return kExitOk;
}

}  // namespace riskbound::cli
