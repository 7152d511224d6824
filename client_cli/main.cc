// riskbound: the command-line client of riskbound-server.
#include <iostream>
#include <string>
#include <vector>

#include "client_cli/commands.h"

int main(int argc, char** argv) {
  return riskbound::cli::RunCli(std::vector<std::string>(argv, argv + argc), std::cout, std::cerr);
}
