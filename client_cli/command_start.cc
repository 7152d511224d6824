#include "client_cli/command_start.h"

#include "client_cli/exit_codes.h"
#include "client_cli/json_io.h"

namespace riskbound::cli {

int UsageError(std::ostream& err, const std::string& name, const std::string& message) {
  err << "riskbound " << name << ": " << message << "\n(see riskbound " << name << " --help)\n";
  return kExitUsage;
}

std::optional<int> StartCommand(const std::string& name, const std::string& usage,
                                const std::string& summary, const std::vector<OptionSpec>& specs,
                                const std::vector<std::string>& args, std::ostream& out,
                                std::ostream& err, CommandStart* start,
                                const std::string& terms) {
  auto parsed = ParseArgs(specs, args);
  if (!parsed.ok()) return UsageError(err, name, std::string(parsed.status().message()));
  if (parsed->Has("help")) {
    out << FormatHelp(usage, summary, specs, terms);
    return kExitOk;
  }
  if (parsed->Has("version")) {
    out << "riskbound " << EngineVersion() << "\n";
    return kExitOk;
  }
  const std::string output = parsed->Get("output").value_or("table");
  if (output != "table" && output != "json") {
    return UsageError(err, name, "--output must be table or json");
  }
  auto client = ClientOptionsFromArgs(*parsed);
  if (!client.ok()) return UsageError(err, name, std::string(client.status().message()));
  start->args = *std::move(parsed);
  start->json = output == "json";
  start->client = *client;
  return std::nullopt;
}

std::optional<int> LoadJsonInput(const std::string& name, const std::string& path,
                                 google::protobuf::Message* message, std::ostream& err) {
  auto text = ReadInput(path);
  absl::Status status = text.ok() ? ParseJson(*text, path, message) : text.status();
  if (status.ok()) return std::nullopt;
  err << "riskbound " << name << ": " << status.message() << "\n";
  return kExitInvalidInput;
}

}  // namespace riskbound::cli
