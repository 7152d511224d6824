// riskbound-server: the gRPC service that certifies classifiers' true error.
//
// Flags are defined here only, read once, and passed down in a config struct.
#include <pthread.h>
#include <signal.h>

#include <cstdio>
#include <fstream>
#include <memory>
#include <string>
#include <thread>

#include "absl/flags/flag.h"
#include "absl/flags/parse.h"
#include "absl/flags/usage.h"
#include "absl/strings/str_cat.h"
#include "absl/time/time.h"
#include "service/rpc/server.h"
#include "spdlog/pattern_formatter.h"
#include "spdlog/spdlog.h"

ABSL_FLAG(std::string, listen, "127.0.0.1:50051",
          "host:port to listen on; port 0 picks a free port (see --port_file)");
ABSL_FLAG(int, threads, 4, "maximum threads serving requests");
ABSL_FLAG(std::string, log_format, "text", "log line format: text or json");
ABSL_FLAG(std::string, log_level, "info", "log level: debug (one line per request), info, warn");
ABSL_FLAG(std::string, port_file, "",
          "if set, write the bound port to this file once serving (for tests and scripts)");
ABSL_FLAG(int, drain_seconds, 10,
          "on SIGTERM/SIGINT, seconds to let calls in flight finish before cancelling");

namespace {

// %* in a spdlog pattern: the message, escaped for a JSON string.
class JsonMessageFlag final : public spdlog::custom_flag_formatter {
 public:
  void format(const spdlog::details::log_msg& msg, const std::tm&,
              spdlog::memory_buf_t& dest) override {
    for (char c : std::string_view(msg.payload.data(), msg.payload.size())) {
      switch (c) {
        case '"': dest.append(std::string_view("\\\"")); break;
        case '\\': dest.append(std::string_view("\\\\")); break;
        case '\n': dest.append(std::string_view("\\n")); break;
        case '\t': dest.append(std::string_view("\\t")); break;
        default:
          if (static_cast<unsigned char>(c) < 0x20) {
            char buf[8];
            std::snprintf(buf, sizeof(buf), "\\u%04x", c);
            dest.append(std::string_view(buf));
          } else {
            dest.push_back(c);
          }
      }
    }
  }
  std::unique_ptr<custom_flag_formatter> clone() const override {
    return std::make_unique<JsonMessageFlag>();
  }
};

bool ConfigureLogging(const std::string& format, const std::string& level) {
  const auto lvl = spdlog::level::from_str(level);
  if (lvl == spdlog::level::off && level != "off") return false;
  spdlog::set_level(lvl);
  if (format == "json") {
    auto formatter = std::make_unique<spdlog::pattern_formatter>(spdlog::pattern_time_type::utc);
    formatter->add_flag<JsonMessageFlag>('*').set_pattern(
        R"({"time":"%Y-%m-%dT%H:%M:%S.%fZ","level":"%l","service":"riskbound","message":"%*"})");
    spdlog::set_formatter(std::move(formatter));
  } else if (format == "text") {
    spdlog::set_pattern("%Y-%m-%dT%H:%M:%S.%fZ %l riskbound %v", spdlog::pattern_time_type::utc);
  } else {
    return false;
  }
  return true;
}

}  // namespace

int main(int argc, char** argv) {
  absl::SetProgramUsageMessage(
      "riskbound-server: certifies upper bounds on classifiers' true error over gRPC "
      "(riskbound.v1.RiskBound, grpc.health.v1, server reflection).");
  absl::ParseCommandLine(argc, argv);
  if (!ConfigureLogging(absl::GetFlag(FLAGS_log_format), absl::GetFlag(FLAGS_log_level))) {
    std::fprintf(stderr, "riskbound-server: --log_format must be text or json and --log_level "
                         "one of debug, info, warn, error\n");
    return 2;
  }

  // Block the shutdown signals before gRPC starts its threads, so that only
  // the waiter below receives them.
  sigset_t signals;
  sigemptyset(&signals);
  sigaddset(&signals, SIGINT);
  sigaddset(&signals, SIGTERM);
  pthread_sigmask(SIG_BLOCK, &signals, nullptr);

  riskbound::rpc::ServerConfig config;
  config.listen_address = absl::GetFlag(FLAGS_listen);
  config.threads = absl::GetFlag(FLAGS_threads);
  auto server = riskbound::rpc::StartServer(config);
  if (!server.ok()) {
    spdlog::error("startup failed: {}", server.status().ToString());
    return 1;
  }
  const int port = (*server)->port();
  const std::string port_file = absl::GetFlag(FLAGS_port_file);
  if (!port_file.empty()) {
    const std::string tmp = port_file + ".tmp";
    std::ofstream(tmp) << port << "\n";
    std::rename(tmp.c_str(), port_file.c_str());
  }
  spdlog::info("serving riskbound.v1 version={} listen={} port={} threads={}",
               RISKBOUND_ENGINE_VERSION, config.listen_address, port, config.threads);

  const absl::Duration grace = absl::Seconds(absl::GetFlag(FLAGS_drain_seconds));
  riskbound::rpc::RunningServer* running = server->get();
  std::thread waiter([&signals, running, grace] {
    int sig = 0;
    sigwait(&signals, &sig);
    spdlog::info("signal {} received: draining for up to {}s", sig, absl::ToInt64Seconds(grace));
    running->Shutdown(grace);
  });
  running->Wait();
  waiter.join();
  spdlog::info("stopped");
  return 0;
}
