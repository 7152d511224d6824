#include "client_cli/names.h"

#include "absl/strings/ascii.h"
#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_join.h"
#include "absl/strings/str_replace.h"
#include "absl/strings/strip.h"
#include "google/protobuf/descriptor.h"

namespace riskbound::cli {
namespace {

constexpr char kFamilyPrefix[] = "BOUND_FAMILY_";
constexpr char kKindPrefix[] = "MODEL_KIND_";

// Where the CLI word of a family is not its enum name: shorter words kept
// from the first releases.
struct FamilyWordOverride {
  v1::BoundFamily family;
  const char* word;
};
constexpr FamilyWordOverride kFamilyWords[] = {
    {v1::BOUND_FAMILY_HOLDOUT_EXACT_BINOMIAL, "holdout-binomial"},
    {v1::BOUND_FAMILY_HOLDOUT_KL_CHERNOFF, "holdout-kl"},
};

// Lower case, '_' as '-'.
std::string Normalize(absl::string_view name) {
  return absl::StrReplaceAll(absl::AsciiStrToLower(absl::StripAsciiWhitespace(name)),
                             {{"_", "-"}});
}

// The value of `d` named by `name` in enum spelling (with or without
// `prefix`), skipping value 0.
const google::protobuf::EnumValueDescriptor* ByEnumName(const google::protobuf::EnumDescriptor* d,
                                                        absl::string_view prefix,
                                                        absl::string_view name) {
  const std::string n = Normalize(name);
  const std::string p = Normalize(prefix);
  for (int i = 0; i < d->value_count(); ++i) {
    const google::protobuf::EnumValueDescriptor* v = d->value(i);
    if (v->number() == 0) continue;
    const std::string full = Normalize(v->name());
    if (n == full || absl::StrCat(p, n) == full) return v;
  }
  return nullptr;
}

}  // namespace

std::string EnumWord(absl::string_view enum_name, absl::string_view prefix) {
  absl::string_view rest = enum_name;
  absl::ConsumePrefix(&rest, prefix);
  return Normalize(rest);
}

std::string FamilyWord(int family) {
  for (const FamilyWordOverride& o : kFamilyWords) {
    if (o.family == family) return o.word;
  }
  const google::protobuf::EnumValueDescriptor* v =
      v1::BoundFamily_descriptor()->FindValueByNumber(family);
  if (v == nullptr || family == 0) return absl::StrCat("family ", family);
  return EnumWord(v->name(), kFamilyPrefix);
}

std::vector<std::string> FamilyWords() {
  std::vector<std::string> out;
  const google::protobuf::EnumDescriptor* d = v1::BoundFamily_descriptor();
  for (int i = 0; i < d->value_count(); ++i) {
    if (d->value(i)->number() != 0) out.push_back(FamilyWord(d->value(i)->number()));
  }
  return out;
}

std::optional<v1::BoundFamily> FamilyFromName(absl::string_view name) {
  const std::string n = Normalize(name);
  const google::protobuf::EnumDescriptor* d = v1::BoundFamily_descriptor();
  for (int i = 0; i < d->value_count(); ++i) {
    const int number = d->value(i)->number();
    if (number != 0 && FamilyWord(number) == n) return static_cast<v1::BoundFamily>(number);
  }
  if (const auto* v = ByEnumName(d, kFamilyPrefix, name)) {
    return static_cast<v1::BoundFamily>(v->number());
  }
  return std::nullopt;
}

std::string UnknownFamilyMessage(absl::string_view name) {
  return absl::StrCat("unknown family '", name, "'; known: ", absl::StrJoin(FamilyWords(), ", "),
                      " (or their enum names, e.g. BOUND_FAMILY_HOLDOUT_KL_CHERNOFF)");
}

std::optional<v1::ModelKind> ModelKindFromEnumName(absl::string_view name) {
  if (const auto* v = ByEnumName(v1::ModelKind_descriptor(), kKindPrefix, name)) {
    return static_cast<v1::ModelKind>(v->number());
  }
  return std::nullopt;
}

const char* VerdictWord(v1::Verdict v) {
  switch (v) {
    case v1::VERDICT_PROMOTE:
      return "PROMOTE";
    case v1::VERDICT_HOLD:
      return "HOLD";
    case v1::VERDICT_REJECT:
      return "REJECT";
    default:
      return "UNSPECIFIED";
  }
}

}  // namespace riskbound::cli
