// The CLI's commands: one file per command (cmd_<name>.cc), registered in
// commands.cc. RunCli is main() without the process: tests call it directly.
#ifndef RISKBOUND_CLIENT_CLI_COMMANDS_H_
#define RISKBOUND_CLIENT_CLI_COMMANDS_H_

#include <ostream>
#include <string>
#include <vector>

namespace riskbound::cli {

// A command's entry point: the words after the command name, where to print
// results and where to print errors. Returns an exit code (exit_codes.h).
using CommandFn = int (*)(const std::vector<std::string>& args, std::ostream& out,
                          std::ostream& err);

struct Command {
  const char* name;
  const char* summary;
  CommandFn run;
};

int RunBench(const std::vector<std::string>& args, std::ostream& out, std::ostream& err);
int RunCapacity(const std::vector<std::string>& args, std::ostream& out, std::ostream& err);
int RunEffectiveVc(const std::vector<std::string>& args, std::ostream& out, std::ostream& err);
int RunCertify(const std::vector<std::string>& args, std::ostream& out, std::ostream& err);
int RunFamilies(const std::vector<std::string>& args, std::ostream& out, std::ostream& err);
int RunGate(const std::vector<std::string>& args, std::ostream& out, std::ostream& err);
int RunPlan(const std::vector<std::string>& args, std::ostream& out, std::ostream& err);
int RunScore(const std::vector<std::string>& args, std::ostream& out, std::ostream& err);
int RunSelect(const std::vector<std::string>& args, std::ostream& out, std::ostream& err);

// Commands
// Every command, in the order `riskbound --help` lists them.
const std::vector<Command>& Commands();

// RunCli
// Dispatches argv[1] to its command; prints the overview for --help or no
// command. Returns the exit code.
int RunCli(const std::vector<std::string>& argv, std::ostream& out, std::ostream& err);

}  // namespace riskbound::cli

#endif  // RISKBOUND_CLIENT_CLI_COMMANDS_H_
