#include "client_cli/model_flags.h"

#include <cstdint>

#include "absl/strings/ascii.h"
#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "absl/strings/str_join.h"
#include "absl/strings/str_replace.h"

namespace riskbound::cli {
namespace {

struct KindWord {
  const char* word;
  v1::ModelKind kind;
  const char* what;
  const char* flags;
};

constexpr KindWord kKindWords[] = {
    {"halfspace", v1::MODEL_KIND_HALFSPACE, "sign(w.x + b) in R^d", "--dimension [--no-bias]"},
    {"polynomial", v1::MODEL_KIND_POLYNOMIAL_THRESHOLD, "polynomial threshold, degree <= p",
     "--dimension --degree [--no-bias]"},
    {"margin-linear", v1::MODEL_KIND_MARGIN_LINEAR, "large-margin (gap-tolerant) linear",
     "--radius --margin [--dimension]"},
    {"boxes", v1::MODEL_KIND_AXIS_ALIGNED_BOXES, "axis-aligned boxes in R^d", "--dimension"},
    {"interval", v1::MODEL_KIND_INTERVAL, "one interval on the line", "(none)"},
    {"intervals", v1::MODEL_KIND_UNION_OF_INTERVALS, "union of k intervals", "--intervals"},
    {"stump", v1::MODEL_KIND_DECISION_STUMP, "decision stumps over d features", "--features"},
    {"tree", v1::MODEL_KIND_DECISION_TREE, "decision tree, at most L leaves",
     "--leaves --features"},
    {"voted-ensemble", v1::MODEL_KIND_VOTED_ENSEMBLE, "weighted vote of T base classifiers",
     "--members --member-vc"},
    {"threshold-net", v1::MODEL_KIND_THRESHOLD_NETWORK, "net of linear threshold units",
     "--widths | --parameters --units"},
    {"relu", v1::MODEL_KIND_RELU_NETWORK, "net of ReLU units",
     "--widths | --parameters --units --layers"},
    {"sigmoid-net", v1::MODEL_KIND_SIGMOID_NETWORK, "net of sigmoid units",
     "--widths | --parameters --units"},
    {"finite-class", v1::MODEL_KIND_FINITE_CLASS, "finite class fixed in advance",
     "--hypotheses | --bits"},
    {"nearest-neighbour", v1::MODEL_KIND_NEAREST_NEIGHBOUR, "1-NN / k-NN (infinite VC)",
     "[--dimension]"},
    {"rbf-kernel", v1::MODEL_KIND_RBF_KERNEL_NO_MARGIN,
     "RBF kernel, no margin (infinite VC)", "[--dimension]"},
};

// Count flags: flag name -> setter.
struct CountFlag {
  const char* flag;
  void (v1::ModelDescription::*set)(std::uint64_t);
};
constexpr CountFlag kCountFlags[] = {
    {"dimension", &v1::ModelDescription::set_dimension},
    {"degree", &v1::ModelDescription::set_degree},
    {"intervals", &v1::ModelDescription::set_interval_count},
    {"features", &v1::ModelDescription::set_feature_count},
    {"leaves", &v1::ModelDescription::set_leaf_count},
    {"members", &v1::ModelDescription::set_member_count},
    {"member-vc", &v1::ModelDescription::set_member_vc_dimension},
    {"parameters", &v1::ModelDescription::set_weight_count},
    {"units", &v1::ModelDescription::set_unit_count},
    {"layers", &v1::ModelDescription::set_layer_count},
    {"hypotheses", &v1::ModelDescription::set_hypothesis_count},
};

struct RealFlag {
  const char* flag;
  void (v1::ModelDescription::*set)(double);
};
constexpr RealFlag kRealFlags[] = {
    {"radius", &v1::ModelDescription::set_radius},
    {"margin", &v1::ModelDescription::set_margin},
    {"bits", &v1::ModelDescription::set_description_bits},
};

std::string Normalize(absl::string_view name) {
  return absl::StrReplaceAll(absl::AsciiStrToLower(name), {{"_", "-"}});
}

}  // namespace

std::optional<v1::ModelKind> ModelKindFromName(absl::string_view name) {
  const std::string n = Normalize(name);
  for (const KindWord& k : kKindWords) {
    if (n == k.word) return k.kind;
  }
  // The API spelling: MODEL_KIND_RELU_NETWORK, relu_network, relu-network.
  for (const KindWord& k : kKindWords) {
    const std::string api = Normalize(v1::ModelKind_Name(k.kind));  // model-kind-relu-network
    if (n == api || absl::StrCat("model-kind-", n) == api) return k.kind;
  }
  return std::nullopt;
}

std::string ModelKindWord(v1::ModelKind kind) {
  for (const KindWord& k : kKindWords) {
    if (k.kind == kind) return k.word;
  }
  return "unknown";
}

std::string ModelKindHelp() {
  std::string out;
  for (const KindWord& k : kKindWords) {
    absl::StrAppendFormat(&out, "  %-18s %-44s %s\n", k.word, k.what, k.flags);
  }
  return out;
}

std::string ModelKindList() {
  std::vector<std::string> words;
  for (const KindWord& k : kKindWords) words.emplace_back(k.word);
  return absl::StrJoin(words, ", ");
}

std::vector<OptionSpec> CapacityOptions() {
  std::vector<OptionSpec> specs = {
      {"vc-dimension", "H", "capacity: VC dimension of the class"},
      {"hypothesis-count", "N", "capacity: number of hypotheses of a finite class"},
      {"log-hypothesis-count", "X", "capacity: ln of the number of hypotheses"},
      {"model", "KIND", "capacity: a model family with its parameter flags below, turned into a "
                        "capacity by the server (kinds: `riskbound capacity --help`)"},
  };
  for (OptionSpec& s : ModelParameterOptions()) {
    s.help = "with --model: " + s.help;
    specs.push_back(s);
  }
  return specs;
}

std::vector<OptionSpec> ModelParameterOptions() {
  return {
      {"dimension", "D", "input dimension d (model.dimension)"},
      {"no-bias", "", "halfspace/polynomial without the offset b (model.with_bias = false)"},
      {"degree", "P", "polynomial: total degree p (model.degree)"},
      {"radius", "R", "margin-linear: ||x|| <= R on the whole input distribution (model.radius)"},
      {"margin", "G", "margin-linear: margin half-width gamma, fixed in advance (model.margin)"},
      {"intervals", "K", "intervals: number of intervals k (model.interval_count)"},
      {"features", "D", "stump/tree: number of real features (model.feature_count)"},
      {"leaves", "L", "tree: at most L leaves (model.leaf_count)"},
      {"members", "T", "voted-ensemble: number of members T (model.member_count)"},
      {"member-vc", "D", "voted-ensemble: VC dimension of the base class (model.member_vc_dimension)"},
      {"widths", "W0,W1,..,1", "nets: layer widths, input first, output 1 (model.layer_widths)"},
      {"parameters", "W", "nets: weights and biases W (model.weight_count)"},
      {"units", "N", "nets: computation units, output included (model.unit_count)"},
      {"layers", "L", "nets: computation layers, output included (model.layer_count)"},
      {"hypotheses", "N", "finite-class: number of hypotheses |H| (model.hypothesis_count)"},
      {"bits", "B", "finite-class: description length in bits, |H| <= 2^B (model.description_bits)"},
  };
}

bool AnyModelParameter(const ParsedArgs& args) {
  for (const OptionSpec& s : ModelParameterOptions()) {
    if (args.Has(s.name)) return true;
  }
  return false;
}

std::optional<std::string> ModelFromFlags(v1::ModelKind kind, const ParsedArgs& args,
                                          v1::ModelDescription* model) {
  model->set_kind(kind);
  for (const CountFlag& f : kCountFlags) {
    auto v = args.GetUint64(f.flag);
    if (!v.ok()) return std::string(v.status().message());
    if (v->has_value()) (model->*f.set)(**v);
  }
  for (const RealFlag& f : kRealFlags) {
    auto v = args.GetDouble(f.flag);
    if (!v.ok()) return std::string(v.status().message());
    if (v->has_value()) (model->*f.set)(**v);
  }
  if (args.Has("no-bias")) model->set_with_bias(false);
  if (args.Has("widths")) {
    const std::vector<std::string> widths = args.GetList("widths");
    if (widths.empty()) {
      return std::string("--widths: give the layer widths, input first and output 1 last, "
                         "e.g. 784,300,100,1");
    }
    for (std::size_t i = 0; i < widths.size(); ++i) {
      std::uint64_t w = 0;
      if (widths[i].empty() || widths[i][0] == '-' || !absl::SimpleAtoi(widths[i], &w)) {
        return absl::StrCat("--widths: width ", i + 1, " is '", widths[i],
                            "'; expected whole numbers >= 0 separated by commas");
      }
      model->add_layer_widths(w);
    }
  }
  return std::nullopt;
}

std::string DescribeModel(const v1::ModelDescription& m) {
  std::vector<std::string> parts;
  if (m.has_dimension()) parts.push_back(absl::StrCat("d = ", m.dimension()));
  if (m.has_with_bias()) parts.push_back(m.with_bias() ? "with bias" : "no bias");
  if (m.has_degree()) parts.push_back(absl::StrCat("degree ", m.degree()));
  if (m.has_radius()) parts.push_back(absl::StrFormat("R = %g", m.radius()));
  if (m.has_margin()) parts.push_back(absl::StrFormat("gamma = %g", m.margin()));
  if (m.has_interval_count()) parts.push_back(absl::StrCat(m.interval_count(), " intervals"));
  if (m.has_feature_count()) parts.push_back(absl::StrCat(m.feature_count(), " features"));
  if (m.has_leaf_count()) parts.push_back(absl::StrCat(m.leaf_count(), " leaves"));
  if (m.has_member_count()) parts.push_back(absl::StrCat(m.member_count(), " members"));
  if (m.has_member_vc_dimension()) {
    parts.push_back(absl::StrCat("member VC ", m.member_vc_dimension()));
  }
  if (m.layer_widths_size() > 0) {
    parts.push_back(absl::StrCat("layer widths ", absl::StrJoin(m.layer_widths(), ",")));
  }
  if (m.has_weight_count()) parts.push_back(absl::StrCat(m.weight_count(), " parameters"));
  if (m.has_unit_count()) parts.push_back(absl::StrCat(m.unit_count(), " units"));
  if (m.has_layer_count()) parts.push_back(absl::StrCat(m.layer_count(), " layers"));
  if (m.has_hypothesis_count()) parts.push_back(absl::StrCat("|H| = ", m.hypothesis_count()));
  if (m.has_description_bits()) {
    parts.push_back(absl::StrFormat("%g description bits", m.description_bits()));
  }
  std::string out = ModelKindWord(m.kind());
  if (!parts.empty()) absl::StrAppend(&out, " (", absl::StrJoin(parts, ", "), ")");
  return out;
}

}  // namespace riskbound::cli
