#include "service/rpc/logging.h"

#include <cstdio>
#include <memory>
#include <string>

#include "absl/strings/str_cat.h"
#include "google/protobuf/stubs/logging.h"
#include "grpc/support/log.h"
#include "spdlog/pattern_formatter.h"
#include "spdlog/spdlog.h"

namespace riskbound::rpc {
namespace {

// Set once by ConfigureLogging before other threads start; read-only after.
LogFormat g_format = LogFormat::kText;

// %* in a spdlog pattern: the message as a JSON string, or, for a message
// that LogCall made (it starts with kFieldsMarker), its fields as they are.
constexpr char kFieldsMarker = '\x1e';

class JsonPayloadFlag final : public spdlog::custom_flag_formatter {
 public:
  void format(const spdlog::details::log_msg& msg, const std::tm&,
              spdlog::memory_buf_t& dest) override {
    const absl::string_view payload(msg.payload.data(), msg.payload.size());
    if (!payload.empty() && payload[0] == kFieldsMarker) {
      const absl::string_view fields = payload.substr(1);
      dest.append(fields.data(), fields.data() + fields.size());
      return;
    }
    const std::string escaped = absl::StrCat("\"message\":\"", JsonEscape(payload), "\"");
    dest.append(escaped.data(), escaped.data() + escaped.size());
  }
  std::unique_ptr<custom_flag_formatter> clone() const override {
    return std::make_unique<JsonPayloadFlag>();
  }
};

void GrpcLogToSpdlog(gpr_log_func_args* args) {
  const auto level =
      args->severity == GPR_LOG_SEVERITY_ERROR ? spdlog::level::warn : spdlog::level::debug;
  spdlog::log(level, "grpc: {}", args->message == nullptr ? "" : args->message);
}

void ProtobufLogToSpdlog(google::protobuf::LogLevel level, const char* /*filename*/,
                         int /*line*/, const std::string& message) {
  // Protobuf reports undecodable input (e.g. invalid UTF-8 in a string field)
  // here; the call itself is answered INVALID_ARGUMENT, so this is debug.
  spdlog::log(level >= google::protobuf::LOGLEVEL_FATAL ? spdlog::level::err
                                                        : spdlog::level::debug,
              "protobuf: {}", message);
}

}  // namespace

std::string JsonEscape(absl::string_view text) {
  std::string out;
  out.reserve(text.size());
  for (char c : text) {
    switch (c) {
      case '"': out += "\\\""; break;
      case '\\': out += "\\\\"; break;
      case '\n': out += "\\n"; break;
      case '\r': out += "\\r"; break;
      case '\t': out += "\\t"; break;
      default:
        if (static_cast<unsigned char>(c) < 0x20 || c == 0x7f) {
          char buf[8];
          std::snprintf(buf, sizeof(buf), "\\u%04x", static_cast<unsigned char>(c));
          out += buf;
        } else {
          out += c;
        }
    }
  }
  return out;
}

absl::Status ConfigureLogging(LogFormat format, absl::string_view level) {
  const std::string lvl(level);
  spdlog::level::level_enum parsed;
  if (lvl == "debug") {
    parsed = spdlog::level::debug;
  } else if (lvl == "info") {
    parsed = spdlog::level::info;
  } else if (lvl == "warn") {
    parsed = spdlog::level::warn;
  } else if (lvl == "error") {
    parsed = spdlog::level::err;
  } else {
    return absl::InvalidArgumentError(
        absl::StrCat("log level must be debug, info, warn or error, got \"", lvl, "\""));
  }
  g_format = format;
  spdlog::set_level(parsed);
  if (format == LogFormat::kJson) {
    auto formatter = std::make_unique<spdlog::pattern_formatter>(spdlog::pattern_time_type::utc);
    formatter->add_flag<JsonPayloadFlag>('*').set_pattern(
        R"({"time":"%Y-%m-%dT%H:%M:%S.%fZ","level":"%l","service":"riskbound",%*})");
    spdlog::set_formatter(std::move(formatter));
  } else {
    spdlog::set_pattern("%Y-%m-%dT%H:%M:%S.%fZ %l riskbound %v", spdlog::pattern_time_type::utc);
  }
  gpr_set_log_function(GrpcLogToSpdlog);
  gpr_set_log_verbosity(parsed == spdlog::level::debug ? GPR_LOG_SEVERITY_INFO
                                                     : GPR_LOG_SEVERITY_ERROR);
  google::protobuf::SetLogHandler(ProtobufLogToSpdlog);
  return absl::OkStatus();
}

bool CallLogging() { return spdlog::should_log(spdlog::level::debug); }

void LogCall(const CallRecord& r) {
  if (!CallLogging()) return;
  const bool failed = r.code != absl::StatusCode::kOk;
  const std::string code = absl::StatusCodeToString(r.code);
  if (g_format == LogFormat::kJson) {
    std::string line = absl::StrCat(
        std::string(1, kFieldsMarker), "\"message\":\"call\",\"transport\":\"",
        JsonEscape(r.transport), "\",\"rpc\":\"", JsonEscape(r.rpc),
        "\",\"code\":\"", code, "\",\"latency_us\":", r.latency_us, ",\"peer\":\"",
        JsonEscape(r.peer), "\",\"request_id\":\"", JsonEscape(r.request_id),
        "\",\"request_bytes\":", r.request_bytes, ",\"response_bytes\":", r.response_bytes);
    if (failed) absl::StrAppend(&line, ",\"error\":\"", JsonEscape(r.message), "\"");
    spdlog::debug("{}", line);
    return;
  }
  spdlog::debug("call transport={} rpc={} code={} latency_us={} peer={} request_id={} "
                "request_bytes={} response_bytes={}{}{}",
                std::string(r.transport), std::string(r.rpc), code, r.latency_us,
                std::string(r.peer),
                std::string(r.request_id), r.request_bytes,
                r.response_bytes, failed ? " error=" : "",
                failed ? JsonEscape(r.message) : std::string());
}

}  // namespace riskbound::rpc
