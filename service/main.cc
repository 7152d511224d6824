// riskbound-server: the gRPC service that certifies classifiers' true error.
//
// Flags are defined here only, read once, and passed down in a config struct.
// Every flag has a kebab-case name (--port-file; the older --port_file is
// still accepted) and a RISKBOUND_* environment variable; a flag given on the
// command line wins over the environment.
#include <pthread.h>
#include <signal.h>

#include <cstdio>
#include <cstdlib>
#include <algorithm>
#include <fstream>
#include <iostream>
#include <memory>
#include <string>
#include <thread>
#include <tuple>
#include <vector>

#include "absl/flags/commandlineflag.h"
#include "absl/flags/flag.h"
#include "absl/flags/reflection.h"
#include "absl/strings/ascii.h"
#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_replace.h"
#include "absl/strings/str_split.h"
#include "absl/strings/strip.h"
#include "absl/synchronization/mutex.h"
#include "absl/time/time.h"
#include "service/rpc/logging.h"
#include "service/rpc/server.h"
#include "spdlog/spdlog.h"

ABSL_FLAG(std::string, listen, "127.0.0.1:50051",
          "HOST:PORT to listen on (IPv6 as [ADDR]:PORT). Port 0 picks a free port (see "
          "--port-file). A port another process listens on is refused, never shared.");
ABSL_FLAG(int, threads, 0,
          "threads computing answers: at most this many calls compute at once, whatever the "
          "number of calls in flight (0: one per CPU core)");
ABSL_FLAG(int, max_pending_calls, 64,
          "calls admitted at once, computing or waiting for a thread; a call beyond this is "
          "answered RESOURCE_EXHAUSTED at once (at least --threads)");
ABSL_FLAG(double, max_call_seconds, 10,
          "time budget of one call, whatever the client's deadline; a call past it stops and "
          "answers DEADLINE_EXCEEDED (0 < S <= 3600)");
ABSL_FLAG(int64_t, max_request_bytes, 4 << 20,
          "largest request accepted, in bytes after decompression; a larger one is answered "
          "RESOURCE_EXHAUSTED (1 KiB .. 1 GiB)");
ABSL_FLAG(int64_t, max_response_bytes, 4 << 20,
          "largest answer sent, in bytes; a larger one is answered RESOURCE_EXHAUSTED saying so. "
          "4 MiB is what a default gRPC client accepts (1 KiB .. 1 GiB)");
ABSL_FLAG(double, drain_seconds, 10,
          "on SIGTERM or SIGINT: seconds the calls in flight may run before they are cancelled "
          "and the process exits (0 .. 3600); a second signal exits at once");
ABSL_FLAG(std::string, log_format, "text", "log line format: text or json (one object a line)");
ABSL_FLAG(std::string, log_level, "info",
          "log level: debug (adds one line per call), info, warn or error");
ABSL_FLAG(std::string, http_listen, "",
          "HOST:PORT of the HTTP port: Prometheus metrics at GET /metrics and the methods as "
          "POST /v1/<Method> with the protobuf JSON mapping (same limits as gRPC). Empty: no "
          "HTTP port. Port 0 picks a free port (see --http-port-file).");
ABSL_FLAG(std::string, http_port_file, "",
          "if set, write the bound HTTP port to this file once serving");
ABSL_FLAG(std::string, tls_cert_file, "",
          "PEM certificate chain of the server (leaf first): serve TLS on the gRPC port and the "
          "HTTP port (needs --tls-key-file)");
ABSL_FLAG(std::string, tls_key_file, "", "PEM private key of --tls-cert-file (unencrypted)");
ABSL_FLAG(std::string, tls_client_ca_file, "",
          "PEM CA certificates: mutual TLS, every client must present a certificate that chains "
          "to one of them and is within its validity dates (needs --tls-cert-file)");
ABSL_FLAG(bool, plaintext, false,
          "serve without TLS (say so explicitly; a warning is logged at start). Without TLS "
          "files and without --plaintext the server does not start");
ABSL_FLAG(std::string, auth_token_file, "",
          "file of bearer tokens, one a line ('#' comments; at least 16 characters each): every "
          "riskbound.v1 call and HTTP request then needs \"authorization: Bearer <token>\" and "
          "is answered UNAUTHENTICATED without one; health checks stay open. Re-read on SIGHUP");
ABSL_FLAG(std::string, port_file, "",
          "if set, write the bound port to this file once serving (for tests and scripts); "
          "a file that cannot be written stops the server with exit code 1");

namespace {

// Exit codes (also in --help).
constexpr int kExitDrained = 0;
constexpr int kExitStartFailed = 1;
constexpr int kExitUsage = 2;
constexpr int kExitDrainExpired = 3;
constexpr int kExitSecondSignal = 4;

// The server's flags: kebab-case name, environment variable, value name.
struct FlagSpec {
  const char* name;
  const char* env;
  const char* value;  // empty for a switch (--plaintext, or --plaintext=false)
};
constexpr FlagSpec kFlags[] = {
    {"listen", "RISKBOUND_LISTEN", "HOST:PORT"},
    {"threads", "RISKBOUND_THREADS", "N"},
    {"max-pending-calls", "RISKBOUND_MAX_PENDING_CALLS", "N"},
    {"max-call-seconds", "RISKBOUND_MAX_CALL_SECONDS", "S"},
    {"max-request-bytes", "RISKBOUND_MAX_REQUEST_BYTES", "N"},
    {"max-response-bytes", "RISKBOUND_MAX_RESPONSE_BYTES", "N"},
    {"drain-seconds", "RISKBOUND_DRAIN_SECONDS", "S"},
    {"log-format", "RISKBOUND_LOG_FORMAT", "text|json"},
    {"log-level", "RISKBOUND_LOG_LEVEL", "LEVEL"},
    {"port-file", "RISKBOUND_PORT_FILE", "PATH"},
    {"http-listen", "RISKBOUND_HTTP_LISTEN", "HOST:PORT"},
    {"http-port-file", "RISKBOUND_HTTP_PORT_FILE", "PATH"},
    {"tls-cert-file", "RISKBOUND_TLS_CERT_FILE", "PATH"},
    {"tls-key-file", "RISKBOUND_TLS_KEY_FILE", "PATH"},
    {"tls-client-ca-file", "RISKBOUND_TLS_CLIENT_CA_FILE", "PATH"},
    {"plaintext", "RISKBOUND_PLAINTEXT", ""},
    {"auth-token-file", "RISKBOUND_AUTH_TOKEN_FILE", "PATH"},
};

absl::CommandLineFlag* FlagOf(const FlagSpec& spec) {
  return absl::FindCommandLineFlag(absl::StrReplaceAll(spec.name, {{"-", "_"}}));
}

const FlagSpec* FindSpec(absl::string_view name) {
  const std::string kebab = absl::StrReplaceAll(name, {{"_", "-"}});
  for (const FlagSpec& spec : kFlags) {
    if (kebab == spec.name) return &spec;
  }
  return nullptr;
}

void PrintHelp() {
  std::cout
      << "riskbound-server: certifies upper bounds on classifiers' true error over gRPC\n"
         "(riskbound.v1.RiskBound, grpc.health.v1 health checking, server reflection).\n\n"
         "usage: riskbound-server [--flag=value | --flag value]...\n\n"
         "Every flag can also be set by its environment variable; a flag on the command\n"
         "line wins. The older snake_case spellings (--port_file) are accepted too.\n\n"
         "transport: give --tls-cert-file and --tls-key-file (TLS; add --tls-client-ca-file for\n"
         "mutual TLS), or --plaintext; with neither the server does not start (exit code 2).\n"
         "The HTTP port uses the same TLS and the same bearer tokens.\n\n"
         "signals: SIGTERM or SIGINT drain and stop; SIGHUP re-reads --auth-token-file.\n\n"
         "flags:\n";
  for (const FlagSpec& spec : kFlags) {
    const absl::CommandLineFlag* flag = FlagOf(spec);
    std::cout << "  --" << spec.name << (*spec.value ? " " : "") << spec.value << "  (env "
              << spec.env
              << "; default " << (flag->DefaultValue().empty() ? "none" : flag->DefaultValue())
              << ")\n      " << flag->Help() << "\n";
  }
  std::cout << "  --help, -h       this text\n"
               "  --version        the engine version\n\n"
               "health: grpc.health.v1 reports SERVING for \"\" and \""
            << riskbound::rpc::kHealthServiceName
            << "\" once started, NOT_SERVING\nfrom the moment a drain starts.\n\n"
               "exit codes:\n"
               "  0  stopped by SIGTERM or SIGINT; every call in flight finished in the drain "
               "period\n"
               "  1  could not start (address in use, malformed or not local; port file not "
               "writable;\n     TLS files or token file unreadable or invalid)\n"
               "  2  usage error (unknown flag, bad value, stray argument)\n"
               "  3  the drain period ran out: calls still in flight were cancelled\n"
               "  4  a second signal during the drain: exited at once\n";
}

int UsageError(const std::string& message) {
  std::cerr << "riskbound-server: " << message << " (see riskbound-server --help)\n";
  return kExitUsage;
}

// Sets every flag from its environment variable, then from argv. Returns -1
// to go on, or the exit code to return (help, version, usage error).
int ReadFlags(int argc, char** argv) {
  for (const FlagSpec& spec : kFlags) {
    const char* value = std::getenv(spec.env);
    if (value == nullptr) continue;
    std::string error;
    if (!FlagOf(spec)->ParseFrom(value, &error)) {
      return UsageError(absl::StrCat("environment ", spec.env, "=\"", value, "\": ", error));
    }
  }
  for (int i = 1; i < argc; ++i) {
    const absl::string_view arg = argv[i];
    if (arg == "--help" || arg == "-h" || arg == "-help") {
      PrintHelp();
      return kExitDrained;
    }
    if (arg == "--version") {
      std::cout << "riskbound-server " << RISKBOUND_ENGINE_VERSION << "\n";
      return kExitDrained;
    }
    if (!absl::StartsWith(arg, "--")) {
      return UsageError(absl::StrCat("unexpected argument \"", arg,
                                     "\": riskbound-server takes flags only"));
    }
    absl::string_view body = arg.substr(2);
    std::string name, value;
    bool has_value = false;
    if (const auto eq = body.find('='); eq != absl::string_view::npos) {
      name = std::string(body.substr(0, eq));
      value = std::string(body.substr(eq + 1));
      has_value = true;
    } else {
      name = std::string(body);
    }
    const FlagSpec* spec = FindSpec(name);
    if (spec == nullptr) return UsageError(absl::StrCat("unknown flag --", name));
    if (!has_value) {
      if (*spec->value == '\0') {
        value = "true";  // a switch
      } else {
        if (i + 1 >= argc) return UsageError(absl::StrCat("--", spec->name, " needs a value"));
        value = argv[++i];
      }
    }
    std::string error;
    if (!FlagOf(*spec)->ParseFrom(value, &error)) {
      return UsageError(absl::StrCat("--", spec->name, "=\"", value, "\": ", error));
    }
  }
  return -1;
}

// Checks HOST:PORT (IPv6 in brackets): a host, and a decimal port in 0..65535.
std::string ListenAddressProblem(const std::string& address) {
  const auto colon = address.rfind(':');
  if (colon == std::string::npos || colon == 0) {
    return "must be HOST:PORT (e.g. 127.0.0.1:50051, [::1]:0, 0.0.0.0:50051)";
  }
  const std::string host = address.substr(0, colon);
  const std::string port = address.substr(colon + 1);
  if (host.find(':') != std::string::npos && !(host.front() == '[' && host.back() == ']')) {
    return "an IPv6 host must be written in brackets, e.g. [::1]:50051";
  }
  std::uint32_t number = 0;
  if (port.empty() || port.size() > 5 ||
      !std::all_of(port.begin(), port.end(), [](char c) { return absl::ascii_isdigit(c); }) ||
      !absl::SimpleAtoi(port, &number) || number > 65535) {
    return absl::StrCat("the port must be a number from 0 to 65535, got \"", port, "\"");
  }
  return "";
}

// Validated configuration, or the usage error to print.
struct Settings {
  riskbound::rpc::ServerConfig server;
  absl::Duration drain;
  riskbound::rpc::LogFormat log_format = riskbound::rpc::LogFormat::kText;
  std::string log_level;
  std::string port_file;
  std::string http_port_file;
};

std::string SettingsProblem(Settings* s) {
  s->server.listen_address = absl::GetFlag(FLAGS_listen);
  if (std::string p = ListenAddressProblem(s->server.listen_address); !p.empty()) {
    return absl::StrCat("--listen=\"", s->server.listen_address, "\": ", p);
  }
  int threads = absl::GetFlag(FLAGS_threads);
  if (threads < 0 || threads > 1024) {
    return absl::StrCat("--threads: must be 0 (one per core) to 1024, got ", threads);
  }
  if (threads == 0) threads = std::max(1u, std::thread::hardware_concurrency());
  s->server.threads = threads;
  const int pending = absl::GetFlag(FLAGS_max_pending_calls);
  if (pending < threads || pending > 100000) {
    return absl::StrCat("--max-pending-calls: must be from --threads (", threads,
                        ") to 100000, got ", pending);
  }
  s->server.max_pending_calls = pending;
  const double call_seconds = absl::GetFlag(FLAGS_max_call_seconds);
  if (!(call_seconds > 0 && call_seconds <= 3600)) {
    return absl::StrCat("--max-call-seconds: must be > 0 and <= 3600, got ", call_seconds);
  }
  s->server.limits.max_call_time = absl::Seconds(call_seconds);
  for (auto [name, value, out] :
       {std::tuple{"--max-request-bytes", absl::GetFlag(FLAGS_max_request_bytes),
                   &s->server.limits.max_request_bytes},
        std::tuple{"--max-response-bytes", absl::GetFlag(FLAGS_max_response_bytes),
                   &s->server.limits.max_response_bytes}}) {
    if (value < 1024 || value > (int64_t{1} << 30)) {
      return absl::StrCat(name, ": must be from 1024 to 1073741824 bytes, got ", value);
    }
    *out = value;
  }
  const double drain = absl::GetFlag(FLAGS_drain_seconds);
  if (!(drain >= 0 && drain <= 3600)) {
    return absl::StrCat("--drain-seconds: must be from 0 to 3600, got ", drain);
  }
  s->drain = absl::Seconds(drain);
  const std::string format = absl::GetFlag(FLAGS_log_format);
  if (format == "json") {
    s->log_format = riskbound::rpc::LogFormat::kJson;
  } else if (format != "text") {
    return absl::StrCat("--log-format: must be text or json, got \"", format, "\"");
  }
  s->log_level = absl::GetFlag(FLAGS_log_level);
  s->port_file = absl::GetFlag(FLAGS_port_file);
  s->server.http_listen_address = absl::GetFlag(FLAGS_http_listen);
  if (!s->server.http_listen_address.empty()) {
    if (std::string p = ListenAddressProblem(s->server.http_listen_address); !p.empty()) {
      return absl::StrCat("--http-listen=\"", s->server.http_listen_address, "\": ", p);
    }
  }
  s->http_port_file = absl::GetFlag(FLAGS_http_port_file);
  if (!s->http_port_file.empty() && s->server.http_listen_address.empty()) {
    return "--http-port-file needs --http-listen";
  }
  s->server.auth_token_file = absl::GetFlag(FLAGS_auth_token_file);
  return "";
}

// The transport flags, checked after every other flag (so that a bad value
// elsewhere is named first): TLS files, or --plaintext, never both or neither.
std::string TransportProblem(Settings* s) {
  riskbound::rpc::TlsFiles& tls = s->server.tls;
  tls.cert_file = absl::GetFlag(FLAGS_tls_cert_file);
  tls.key_file = absl::GetFlag(FLAGS_tls_key_file);
  tls.client_ca_file = absl::GetFlag(FLAGS_tls_client_ca_file);
  s->server.plaintext = absl::GetFlag(FLAGS_plaintext);
  if (tls.cert_file.empty() != tls.key_file.empty()) {
    return tls.cert_file.empty() ? "--tls-key-file needs --tls-cert-file"
                                 : "--tls-cert-file needs --tls-key-file";
  }
  if (!tls.client_ca_file.empty() && tls.cert_file.empty()) {
    return "--tls-client-ca-file (mutual TLS) needs --tls-cert-file and --tls-key-file";
  }
  if (s->server.plaintext && tls.enabled()) {
    return "--plaintext (RISKBOUND_PLAINTEXT) and --tls-cert-file (RISKBOUND_TLS_CERT_FILE): "
           "choose one";
  }
  if (!s->server.plaintext && !tls.enabled()) {
    return "choose the transport: --tls-cert-file and --tls-key-file to serve TLS (add "
           "--tls-client-ca-file for mutual TLS), or --plaintext to serve unencrypted (on "
           "loopback or a trusted network only)";
  }
  return "";
}

bool WritePortFile(const std::string& path, int port, std::string* error) {
  const std::string tmp = path + ".tmp";
  {
    std::ofstream out(tmp);
    out << port << "\n";
    out.close();
    if (!out) {
      *error = absl::StrCat("cannot write ", tmp);
      return false;
    }
  }
  if (std::rename(tmp.c_str(), path.c_str()) != 0) {
    std::remove(tmp.c_str());
    *error = absl::StrCat("cannot rename ", tmp, " to ", path);
    return false;
  }
  return true;
}

// On SIGHUP: the token file again. A file that no longer reads keeps the
// tokens in force.
void ReloadTokens(riskbound::rpc::RunningServer* running) {
  riskbound::rpc::TokenAuthenticator* auth = running->auth();
  if (auth == nullptr) {
    spdlog::info("SIGHUP received: no --auth-token-file to re-read");
    return;
  }
  auto count = auth->Reload();
  if (count.ok()) {
    spdlog::info("SIGHUP received: {} bearer token(s) in force from {}", *count, auth->path());
  } else {
    spdlog::warn("SIGHUP received: {}; the {} token(s) read before stay in force",
                 std::string(count.status().message()), auth->token_count());
  }
}

}  // namespace

int main(int argc, char** argv) {
  if (const int code = ReadFlags(argc, argv); code >= 0) return code;
  Settings settings;
  if (std::string problem = SettingsProblem(&settings); !problem.empty()) {
    return UsageError(problem);
  }
  if (absl::Status s = riskbound::rpc::ConfigureLogging(settings.log_format, settings.log_level);
      !s.ok()) {
    return UsageError(absl::StrCat("--log-level: ", s.message()));
  }
  if (std::string problem = TransportProblem(&settings); !problem.empty()) {
    return UsageError(problem);
  }

  // Debian's Abseil is built with the Mutex deadlock detector on: every lock
  // taken updates a global graph of lock orders, which cost about a tenth of
  // the server's CPU under load (riskbound bench, docs/performance.md). The
  // tests keep it on in their own processes.
  absl::SetMutexDeadlockDetectionMode(absl::OnDeadlockCycle::kIgnore);

  // Block the shutdown signals before gRPC starts its threads, so that only
  // this thread (sigwait below) receives them.
  sigset_t signals;
  sigemptyset(&signals);
  sigaddset(&signals, SIGINT);
  sigaddset(&signals, SIGTERM);
  sigaddset(&signals, SIGHUP);
  pthread_sigmask(SIG_BLOCK, &signals, nullptr);

  auto server = riskbound::rpc::StartServer(settings.server);
  if (!server.ok()) {
    spdlog::error("startup failed: {}", std::string(server.status().message()));
    return kExitStartFailed;
  }
  riskbound::rpc::RunningServer* running = server->get();
  const int port = running->port();
  for (const auto& [flag, path, value] :
       {std::tuple{"--http-port-file", settings.http_port_file, running->http_port()},
        std::tuple{"--port-file", settings.port_file, port}}) {
    if (path.empty()) continue;
    std::string error;
    if (!WritePortFile(path, value, &error)) {
      spdlog::error("startup failed: {}: {}", flag, error);
      running->Drain(absl::ZeroDuration());
      return kExitStartFailed;
    }
  }
  const auto& c = settings.server;
  if (c.plaintext) {
    spdlog::warn(
        "serving in plaintext (--plaintext): calls{} travel unencrypted and the server is not "
        "authenticated to clients; use TLS (--tls-cert-file, --tls-key-file) off loopback",
        c.auth_token_file.empty() ? "" : " and bearer tokens");
  }
  for (const std::string& warning : running->warnings()) spdlog::warn("{}", warning);
  spdlog::info(
      "serving riskbound.v1 version={} listen={} port={} http_port={} transport={} auth={} "
      "threads={} max_pending_calls={} max_call_seconds={} max_request_bytes={} "
      "max_response_bytes={} drain_seconds={}",
      RISKBOUND_ENGINE_VERSION, c.listen_address, port, running->http_port(),
      c.plaintext ? "plaintext" : (c.tls.mutual() ? "mutual-tls" : "tls"),
      running->auth() == nullptr
          ? std::string("none")
          : absl::StrCat("bearer-tokens(", running->auth()->token_count(), ")"),
      c.threads, c.max_pending_calls, absl::ToDoubleSeconds(c.limits.max_call_time),
      c.limits.max_request_bytes, c.limits.max_response_bytes,
      absl::ToDoubleSeconds(settings.drain));

  // SIGHUP re-reads the token file (its count is logged, never a token);
  // SIGTERM or SIGINT start the drain.
  int sig = 0;
  while (true) {
    sigwait(&signals, &sig);
    if (sig != SIGHUP) break;
    ReloadTokens(running);
  }
  spdlog::info("signal {} received: draining for up to {}s (a second signal exits at once)", sig,
               absl::ToDoubleSeconds(settings.drain));
  // The watcher is detached and may first run after main has returned (an
  // idle drain is quick): it takes its own copy of the signal set, never a
  // reference into main's frame (AddressSanitizer found a stack use after
  // return of `signals` in sigwait at shutdown).
  // During the drain SIGHUP is ignored: the tokens no longer matter, and the
  // server this thread could reach is destroyed when main returns.
  std::thread second([signals] {
    int again = 0;
    do {
      sigwait(&signals, &again);
    } while (again == SIGHUP);
    spdlog::warn("second signal {} received: exiting now", again);
    spdlog::shutdown();
    std::_Exit(kExitSecondSignal);
  });
  second.detach();
  switch (running->Drain(settings.drain)) {
    case riskbound::rpc::DrainOutcome::kClean:
      spdlog::info("stopped: every call in flight finished");
      server->reset();
      return kExitDrained;
    case riskbound::rpc::DrainOutcome::kCancelled:
      spdlog::warn("stopped: the drain period ran out and the calls in flight were cancelled");
      server->reset();
      return kExitDrainExpired;
    case riskbound::rpc::DrainOutcome::kAbandoned:
      break;
  }
  spdlog::warn("stopped: the drain period ran out and a call did not stop when cancelled");
  spdlog::shutdown();
  std::_Exit(kExitDrainExpired);
}
