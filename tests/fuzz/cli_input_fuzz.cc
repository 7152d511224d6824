// Fuzz target: the CLI's readers of untrusted text. The first byte picks
// one: registry CSV (header, then rows), a JSON-lines registry row, output
// rows read back for --resume (JSON lines and CSV), JSON request files of
// every command, the flag parser, slices files (--slices: CSV or JSON), and
// the outward-rounding formatter (whose
// printed upper bounds must read back >= the value, lower bounds <=). A
// finding is a crash, a sanitizer report, or a broken rounding promise.
#include <cmath>
#include <cstdint>
#include <cstdlib>
#include <cstring>
#include <string>
#include <vector>

#include "absl/strings/numbers.h"
#include "absl/strings/str_split.h"
#include "client_cli/args.h"
#include "client_cli/format.h"
#include "client_cli/json_io.h"
#include "client_cli/registry_rows.h"
#include "client_cli/slices_file.h"
#include "riskbound/v1/capacity.pb.h"
#include "riskbound/v1/certify.pb.h"
#include "riskbound/v1/gate.pb.h"
#include "riskbound/v1/plan.pb.h"
#include "riskbound/v1/registry.pb.h"
#include "riskbound/v1/select.pb.h"

namespace {

using namespace riskbound;

void Csv(const std::string& text) {
  const std::size_t nl = text.find('\n');
  const std::string header = text.substr(0, nl);
  auto columns = cli::CsvColumns::FromHeader(header);
  if (!columns.ok() || nl == std::string::npos) return;
  std::uint64_t line = 1;
  for (absl::string_view row : absl::StrSplit(text.substr(nl + 1), '\n')) {
    v1::RegistryRecord record;
    (void)columns->Fill(std::string(row), ++line, &record);
  }
}

void Json(const std::string& text) {
  v1::CertifyRequest certify;
  (void)cli::ParseJson(text, "fuzz", &certify);
  v1::GateRequest gate;
  (void)cli::ParseJson(text, "fuzz", &gate);
  v1::SelectStructureRequest select;
  (void)cli::ParseJson(text, "fuzz", &select);
  v1::PlanSamplesRequest plan;
  (void)cli::ParseJson(text, "fuzz", &plan);
  v1::EstimateCapacityRequest capacity;
  (void)cli::ParseJson(text, "fuzz", &capacity);
  v1::ScoreSettings settings;
  (void)cli::ParseJson(text, "fuzz", &settings);
}

void Args(const std::string& text) {
  std::vector<std::string> args;
  for (absl::string_view a : absl::StrSplit(text, '\0')) args.emplace_back(a);
  const std::vector<cli::OptionSpec> specs = {
      {"failure-probability", "D", "delta", false, {"delta"}},
      {"families", "NAME[,NAME]", "families", true, {"family"}},
      {"output", "table|json", "format"},
      {"size-fixed-in-advance", "", "a switch"},
  };
  auto parsed = cli::ParseArgs(specs, args);
  if (parsed.ok()) {
    (void)parsed->GetList("families");
    (void)parsed->GetDouble("failure-probability");
    (void)parsed->GetUint64("failure-probability");
  }
}

void Rounding(const uint8_t* data, size_t size) {
  if (size < sizeof(double)) return;
  double x;
  std::memcpy(&x, data, sizeof x);
  (void)cli::ShortestDecimal(x);
  (void)cli::FormatFailureProbability(x);
  (void)cli::FormatConfidence(x);
  if (!(x >= 0.0 && x <= 1.0)) return;
  double up = 0, down = 0;
  if (!absl::SimpleAtod(cli::FormatUpper(x), &up) || up < x) std::abort();
  if (!absl::SimpleAtod(cli::FormatLower(x), &down) || down > x) std::abort();
}

}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  if (size < 1) return 0;
  const uint8_t which = data[0] % 7;
  const std::string text(reinterpret_cast<const char*>(data + 1), size - 1);
  switch (which) {
    case 0: Csv(text); break;
    case 1: {
      v1::RegistryRecord record;
      (void)cli::ParseJsonLine(text, 1, &record);
      break;
    }
    case 2:
      (void)cli::RowFromText(text, cli::OutputFormat::kJsonLines);
      (void)cli::RowFromText(text, cli::OutputFormat::kCsv);
      break;
    case 3: Json(text); break;
    case 4: Args(text); break;
    case 5: Rounding(data + 1, size - 1); break;
    case 6: (void)cli::ParseSlices(text, "fuzz"); break;
  }
  return 0;
}
