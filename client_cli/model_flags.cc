#include "client_cli/model_flags.h"

#include <cstdint>

#include "absl/strings/ascii.h"
#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "absl/strings/str_join.h"
#include "absl/strings/str_replace.h"
#include "client_cli/format.h"
#include "client_cli/names.h"

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
    {"intervals", v1::MODEL_KIND_UNION_OF_INTERVALS, "union of k intervals", "--interval-count"},
    {"stump", v1::MODEL_KIND_DECISION_STUMP, "decision stumps over d features", "--feature-count"},
    {"tree", v1::MODEL_KIND_DECISION_TREE, "decision tree, at most L leaves",
     "--leaf-count --feature-count"},
    {"voted-ensemble", v1::MODEL_KIND_VOTED_ENSEMBLE, "weighted vote of T base classifiers",
     "--member-count --member-vc-dimension"},
    {"threshold-net", v1::MODEL_KIND_THRESHOLD_NETWORK, "net of linear threshold units",
     "--layer-widths | --weight-count --unit-count"},
    {"relu", v1::MODEL_KIND_RELU_NETWORK, "net of ReLU units",
     "--layer-widths | --weight-count --unit-count --layer-count"},
    {"sigmoid-net", v1::MODEL_KIND_SIGMOID_NETWORK, "net of sigmoid units",
     "--layer-widths | --weight-count --unit-count"},
    {"finite-class", v1::MODEL_KIND_FINITE_CLASS, "finite class fixed in advance",
     "--model-hypothesis-count | --description-bits"},
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
    {"interval-count", &v1::ModelDescription::set_interval_count},
    {"feature-count", &v1::ModelDescription::set_feature_count},
    {"leaf-count", &v1::ModelDescription::set_leaf_count},
    {"member-count", &v1::ModelDescription::set_member_count},
    {"member-vc-dimension", &v1::ModelDescription::set_member_vc_dimension},
    {"weight-count", &v1::ModelDescription::set_weight_count},
    {"unit-count", &v1::ModelDescription::set_unit_count},
    {"layer-count", &v1::ModelDescription::set_layer_count},
    {"model-hypothesis-count", &v1::ModelDescription::set_hypothesis_count},
};

struct RealFlag {
  const char* flag;
  void (v1::ModelDescription::*set)(double);
};
constexpr RealFlag kRealFlags[] = {
    {"radius", &v1::ModelDescription::set_radius},
    {"margin", &v1::ModelDescription::set_margin},
    {"description-bits", &v1::ModelDescription::set_description_bits},
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
  return ModelKindFromEnumName(name);
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
                        "capacity by the server (capacity.model.kind; a CLI word such as relu or "
                        "the enum name MODEL_KIND_RELU_NETWORK; kinds: `riskbound capacity --help`)",
       false, {"model-kind"}},
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
      {"interval-count", "K", "intervals: number of intervals k (model.interval_count)", false, {"intervals"}},
      {"feature-count", "D", "stump/tree: number of real features (model.feature_count)", false, {"features"}},
      {"leaf-count", "L", "tree: at most L leaves (model.leaf_count)", false, {"leaves"}},
      {"member-count", "T", "voted-ensemble: number of members T (model.member_count)", false, {"members"}},
      {"member-vc-dimension", "D", "voted-ensemble: VC dimension of the base class (model.member_vc_dimension)", false, {"member-vc"}},
      {"layer-widths", "W0,W1,..,1", "nets: layer widths, input first, output 1 (model.layer_widths)", false, {"widths"}},
      {"weight-count", "W", "nets: weights and biases W (model.weight_count)", false, {"parameters"}},
      {"unit-count", "N", "nets: computation units, output included (model.unit_count)", false, {"units"}},
      {"layer-count", "L", "nets: computation layers, output included (model.layer_count)", false, {"layers"}},
      {"model-hypothesis-count", "N", "finite-class: number of hypotheses |H| (model.hypothesis_count)", false, {"hypotheses"}},
      {"description-bits", "B", "finite-class: description length in bits, |H| <= 2^B (model.description_bits)", false, {"bits"}},
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
  if (args.Has("layer-widths")) {
    const std::vector<std::string> widths = args.GetList("layer-widths");
    if (widths.empty()) {
      return std::string("--layer-widths: give the layer widths, input first and output 1 last, "
                         "e.g. 784,300,100,1");
    }
    for (std::size_t i = 0; i < widths.size(); ++i) {
      std::uint64_t w = 0;
      if (widths[i].empty() || widths[i][0] == '-' || !absl::SimpleAtoi(widths[i], &w)) {
        return absl::StrCat("--layer-widths: model.layer_widths[", i, "] (counted from 0) is '",
                            widths[i], "'; expected whole numbers >= 0 separated by commas");
      }
      model->add_layer_widths(w);
    }
  }
  return std::nullopt;
}

std::string DescribeModel(const v1::ModelDescription& m, const std::string& kind_text) {
  std::vector<std::string> parts;
  if (m.has_dimension()) parts.push_back(absl::StrCat("d = ", m.dimension()));
  if (m.has_with_bias()) parts.push_back(m.with_bias() ? "with bias" : "no bias");
  if (m.has_degree()) parts.push_back(absl::StrCat("degree ", m.degree()));
  if (m.has_radius()) parts.push_back(absl::StrCat("R = ", FormatInput(m.radius())));
  if (m.has_margin()) parts.push_back(absl::StrCat("gamma = ", FormatInput(m.margin())));
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
    parts.push_back(absl::StrCat(FormatInput(m.description_bits()), " description bits"));
  }
  std::string out = kind_text.empty() ? ModelKindWord(m.kind()) : kind_text;
  if (!parts.empty()) absl::StrAppend(&out, " (", absl::StrJoin(parts, ", "), ")");
  return out;
}

}  // namespace riskbound::cli
