#include "client_cli/args.h"

#include <algorithm>
#include <cmath>

#include "absl/status/status.h"
#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "absl/strings/str_join.h"
#include "absl/strings/str_split.h"
#include "absl/strings/strip.h"

namespace riskbound::cli {

std::optional<std::string> ParsedArgs::Get(const std::string& name) const {
  auto it = values_.find(name);
  if (it == values_.end() || it->second.empty()) return std::nullopt;
  return it->second.back();
}

std::vector<std::string> ParsedArgs::GetList(const std::string& name) const {
  std::vector<std::string> out;
  auto it = values_.find(name);
  if (it == values_.end()) return out;
  for (const std::string& v : it->second) {
    for (absl::string_view part : absl::StrSplit(v, ',', absl::SkipWhitespace())) {
      out.emplace_back(absl::StripAsciiWhitespace(part));
    }
  }
  return out;
}

absl::StatusOr<std::optional<std::uint64_t>> ParsedArgs::GetUint64(const std::string& name) const {
  const auto text = Get(name);
  if (!text) return std::optional<std::uint64_t>();
  std::uint64_t v = 0;
  if (text->empty() || (*text)[0] == '-' || !absl::SimpleAtoi(*text, &v)) {
    return absl::InvalidArgumentError(
        absl::StrCat("--", name, ": expected a whole number >= 0, got '", *text, "'"));
  }
  return std::optional<std::uint64_t>(v);
}

absl::StatusOr<std::optional<double>> ParsedArgs::GetDouble(const std::string& name) const {
  const auto text = Get(name);
  if (!text) return std::optional<double>();
  double v = 0;
  if (!absl::SimpleAtod(*text, &v) || !std::isfinite(v)) {
    return absl::InvalidArgumentError(
        absl::StrCat("--", name, ": expected a finite number, got '", *text, "'"));
  }
  return std::optional<double>(v);
}

absl::StatusOr<ParsedArgs> ParseArgs(const std::vector<OptionSpec>& specs,
                                     const std::vector<std::string>& args) {
  ParsedArgs out;
  for (std::size_t i = 0; i < args.size(); ++i) {
    const std::string& word = args[i];
    if (word == "-h") {
      out.Add("help", "");
      continue;
    }
    if (!absl::StartsWith(word, "--") || word.size() == 2) {
      return absl::InvalidArgumentError(absl::StrCat("unexpected argument '", word, "'"));
    }
    std::string name = word.substr(2);
    std::optional<std::string> inline_value;
    if (auto eq = name.find('='); eq != std::string::npos) {
      inline_value = name.substr(eq + 1);
      name = name.substr(0, eq);
    }
    if (name == "help" || name == "version") {
      out.Add(name, "");
      continue;
    }
    const std::string typed = name;
    auto spec = std::find_if(specs.begin(), specs.end(), [&](const OptionSpec& s) {
      return s.name == name ||
             std::find(s.aliases.begin(), s.aliases.end(), name) != s.aliases.end();
    });
    if (spec == specs.end()) {
      return absl::InvalidArgumentError(absl::StrCat("unknown flag --", name));
    }
    name = spec->name;
    if (out.Has(name) && !spec->repeatable) {
      return absl::InvalidArgumentError(
          typed == name ? absl::StrCat("--", name, " given twice")
                        : absl::StrCat("--", typed, " given twice (--", typed, " is --", name,
                                       ")"));
    }
    if (spec->value_name.empty()) {
      if (inline_value) {
        return absl::InvalidArgumentError(absl::StrCat("--", name, " takes no value"));
      }
      out.Add(name, "");
      continue;
    }
    if (!inline_value) {
      if (i + 1 >= args.size()) {
        return absl::InvalidArgumentError(
            absl::StrCat("--", name, " needs a value (", spec->value_name, ")"));
      }
      inline_value = args[++i];
    }
    out.Add(name, *inline_value);
  }
  return out;
}

std::string FormatHelp(const std::string& usage, const std::string& summary,
                       const std::vector<OptionSpec>& specs, const std::string& terms) {
  std::string out = absl::StrCat("usage: ", usage, "\n\n", summary, "\n\noptions:\n");
  for (const OptionSpec& s : specs) {
    const std::string left =
        s.value_name.empty() ? absl::StrCat("--", s.name) : absl::StrCat("--", s.name, " ", s.value_name);
    std::string help = s.help;
    if (!s.aliases.empty()) {
      std::vector<std::string> also;
      for (const std::string& a : s.aliases) also.push_back(absl::StrCat("--", a));
      absl::StrAppend(&help, " (also ", absl::StrJoin(also, ", "), ")");
    }
    if (left.size() >= 28) {
      absl::StrAppendFormat(&out, "  %s\n  %-28s %s\n", left, "", help);
    } else {
      absl::StrAppendFormat(&out, "  %-28s %s\n", left, help);
    }
  }
  absl::StrAppendFormat(&out, "  %-28s %s\n", "-h, --help", "show this help");
  absl::StrAppendFormat(&out, "  %-28s %s\n", "--version", "print the engine version");
  if (!terms.empty()) absl::StrAppend(&out, "\nterms:\n", terms);
  return out;
}

const char* EngineVersion() { return RISKBOUND_ENGINE_VERSION; }

}  // namespace riskbound::cli
