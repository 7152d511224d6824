// riskbound capacity: the VC dimension of a model family from its description
// (the capacity catalogue, RPC EstimateCapacity).
#include <string>
#include <vector>

#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "client_cli/args.h"
#include "client_cli/client.h"
#include "client_cli/command_start.h"
#include "client_cli/commands.h"
#include "client_cli/exit_codes.h"
#include "client_cli/format.h"
#include "client_cli/json_io.h"
#include "client_cli/model_flags.h"

namespace riskbound::cli {
namespace {

constexpr char kUsage[] =
    "riskbound capacity KIND [parameter flags] [--output table|json]\n"
    "       riskbound capacity --input request.json [--output table|json]";

std::string Summary() {
  return absl::StrCat(
      "Asks the server for the VC dimension of a model family from its architecture: the\n"
      "value, whether it is exact or an upper bound (or infinite), a lower bound where one is\n"
      "known, the formula and its published source. Use the value as --vc-dimension in\n"
      "`riskbound certify`, or give the same description there with --model KIND.\n"
      "--input reads a riskbound.v1.EstimateCapacityRequest in the protobuf JSON mapping\n"
      "(- for stdin). KIND is a CLI word below or the enum name (MODEL_KIND_RELU_NETWORK,\n"
      "relu_network). Each parameter flag is named after its ModelDescription field; the older\n"
      "spellings (listed as \"also\") still work.\n"
      "Example: riskbound capacity relu --layer-widths 784,300,100,1\n"
      "(network widths end in 1: one thresholded output, a binary classifier).\n\n"
      "kinds (KIND, what it is, the flags it uses):\n",
      ModelKindHelp());
}

constexpr char kTerms[] =
    "  capacity       how rich a model class is; here its VC dimension: the largest number of\n"
    "                 points the class can label in every possible way\n"
    "  exact          the VC dimension is known exactly for this description\n"
    "  upper bound    the true VC dimension is at most this value (using it is safe)\n"
    "  lower bound    the true VC dimension is at least this value\n"
    "  infinite       no finite VC dimension: no VC bound applies\n"
    "  ln |H|         natural log of the number of hypotheses of a finite class\n";

std::vector<OptionSpec> Specs() {
  std::vector<OptionSpec> specs = ModelParameterOptions();
  specs.push_back({"input", "FILE", "read the request from a JSON file (- for stdin)"});
  specs.push_back({"output", "table|json", "output format (default table)"});
  for (OptionSpec& s : ConnectionOptions()) specs.push_back(s);
  return specs;
}

int Usage(std::ostream& err, const std::string& message) {
  return UsageError(err, "capacity", message);
}

std::string Value(const v1::CapacityEstimate& e) {
  if (e.has_vc_dimension_uint64()) return absl::StrCat(e.vc_dimension_uint64());
  return FormatSignificant(e.vc_dimension(), 6, Rounding::kUp);
}

void PrintTable(const v1::ModelDescription& model, const std::string& kind_word,
                const v1::EstimateCapacityResponse& r, std::ostream& out) {
  const v1::CapacityEstimate& e = r.estimate();
  out << "Capacity of " << DescribeModel(model, kind_word) << "\n\n";
  auto row = [&](const std::string& label, const std::string& value) {
    out << absl::StrFormat("  %-14s %s\n", label, value);
  };
  switch (e.status()) {
    case v1::CAPACITY_STATUS_EXACT:
      row("VC dimension", absl::StrCat(Value(e), " (exact)"));
      break;
    case v1::CAPACITY_STATUS_UPPER_BOUND:
      row("VC dimension", absl::StrCat("<= ", Value(e), " (upper bound)"));
      break;
    case v1::CAPACITY_STATUS_INFINITE:
      row("VC dimension", "infinite: no VC bound applies (see the notes)");
      break;
    default:
      row("VC dimension", absl::StrCat(Value(e), " (status not given)"));
  }
  if (e.has_vc_dimension_lower_bound() && e.status() != v1::CAPACITY_STATUS_EXACT) {
    row("lower bound", FormatSignificant(e.vc_dimension_lower_bound(), 6, Rounding::kDown));
  }
  if (e.has_log_hypothesis_count()) {
    row("ln |H|", absl::StrCat(FormatSignificant(e.log_hypothesis_count(), 6, Rounding::kUp),
                             " (for the Occam families; rounded up)"));
  }
  if (e.exceeds_uint64() && e.status() != v1::CAPACITY_STATUS_INFINITE) {
    row("64-bit", "does not fit: every VC certificate with it is vacuous");
  }
  row("formula", e.formula());
  row("source", e.source());
  if (e.notes_size() > 0) {
    out << "\nNotes:\n";
    for (const std::string& note : e.notes()) out << "  - " << note << "\n";
  }
}

}  // namespace

int RunCapacity(const std::vector<std::string>& args, std::ostream& out, std::ostream& err) {
  const std::vector<OptionSpec> specs = Specs();
  // The kind is the first word when it is not a flag; ParseArgs takes the rest.
  std::string kind_word;
  std::vector<std::string> rest = args;
  if (!rest.empty() && !absl::StartsWith(rest[0], "--")) {
    kind_word = rest[0];
    rest.erase(rest.begin());
  }
  CommandStart start;
  if (auto code = StartCommand("capacity", kUsage, Summary(), specs, rest, out, err, &start, kTerms)) {
    return *code;
  }

  v1::EstimateCapacityRequest request;
  if (auto input = start.args.Get("input")) {
    if (!kind_word.empty()) return Usage(err, "--input excludes a KIND word");
    if (AnyModelParameter(start.args)) return Usage(err, "--input excludes the parameter flags");
    if (auto code = LoadJsonInput("capacity", *input, &request, err)) return *code;
  } else {
    if (kind_word.empty()) {
      return Usage(err, absl::StrCat("name the model kind first: riskbound capacity KIND "
                                     "[flags]; kinds: ", ModelKindList()));
    }
    const std::optional<v1::ModelKind> kind = ModelKindFromName(kind_word);
    if (!kind.has_value()) {
      return Usage(err, absl::StrCat("unknown model kind '", kind_word,
                                     "'; kinds: ", ModelKindList()));
    }
    if (auto problem = ModelFromFlags(*kind, start.args, request.mutable_model())) {
      return Usage(err, *problem);
    }
  }

  RiskBoundClient client(start.client);
  v1::EstimateCapacityResponse response;
  auto ctx = client.NewContext();
  const grpc::Status status = client.stub()->EstimateCapacity(ctx.get(), request, &response);
  if (!status.ok()) return ReportRpcError(status, client.options(), err);
  if (start.json) {
    out << ToJson(response);
  } else {
    PrintTable(request.model(), kind_word, response, out);
  }
  return kExitOk;
}

}  // namespace riskbound::cli
