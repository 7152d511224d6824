#include "client_cli/slices_file.h"

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <cstring>
#include <map>
#include <memory>
#include <utility>

#include "absl/strings/ascii.h"
#include "absl/strings/match.h"
#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_join.h"
#include "absl/strings/str_split.h"
#include "absl/strings/strip.h"
#include "client_cli/command_start.h"
#include "client_cli/exit_codes.h"
#include "client_cli/json_io.h"
#include "client_cli/names.h"
#include "client_cli/registry_rows.h"
#include "client_cli/shared_flags.h"

namespace riskbound::cli {
namespace {

// The three columns every slice needs, then the optional limit. The proto
// field names; the JSON names (lowerCamelCase) are accepted too.
constexpr const char* kName = "name";
constexpr const char* kErrorCount = "error_count";
constexpr const char* kSampleCount = "sample_count";
constexpr const char* kMaxRisk = "max_risk";

// The proto name a header cell or JSON key stands for, or "".
std::string ColumnFor(absl::string_view key) {
  for (auto [proto, json] : {std::pair<const char*, const char*>{kName, "name"},
                             {kErrorCount, "errorCount"},
                             {kSampleCount, "sampleCount"},
                             {kMaxRisk, "maxRisk"}}) {
    if (key == proto || key == json) return proto;
  }
  return "";
}

// Where a cell or JSON value starts: 1-based line and column.
struct Where {
  std::uint64_t line = 1;
  std::uint64_t column = 1;
};

absl::Status Bad(const std::string& source, Where at, absl::string_view column,
                 absl::string_view what) {
  return absl::InvalidArgumentError(
      column.empty() ? absl::StrCat(source, ", line ", at.line, ", column ", at.column, ": ", what)
                     : absl::StrCat(source, ", line ", at.line, ", column ", at.column, " (",
                                    column, "): ", what));
}

// One slice as read, with where each of its values was.
struct RawSlice {
  Where row;
  std::map<std::string, Where> at;  // by proto column name
  std::string name;
  std::optional<std::string> error_count, sample_count;  // the text of the count
  bool error_count_is_string = false, sample_count_is_string = false;
  std::optional<std::string> max_risk;  // the text; nullopt: no limit
};

absl::Status CheckCount(const std::string& source, const RawSlice& s, const char* column,
                        const std::string& text, std::uint64_t* out) {
  const std::string cell(absl::StripAsciiWhitespace(text));
  bool digits = !cell.empty();
  for (char c : cell) digits = digits && absl::ascii_isdigit(static_cast<unsigned char>(c));
  if (!digits || !absl::SimpleAtoi(cell, out)) {
    return Bad(source, s.at.at(column), column,
               absl::StrCat("'", cell, "' is not a whole number >= 0"));
  }
  return absl::OkStatus();
}

// Checks and converts the raw slices; the same rules for both forms.
absl::StatusOr<SlicesFile> Convert(const std::string& source, const std::vector<RawSlice>& raw,
                                   bool has_max_risk) {
  SlicesFile out;
  out.has_max_risk = has_max_risk;
  std::map<std::string, std::uint64_t> first_line;
  for (const RawSlice& s : raw) {
    for (const char* column : {kName, kErrorCount, kSampleCount}) {
      if (s.at.count(column) == 0) {
        return Bad(source, s.row, "", absl::StrCat("the slice has no ", column));
      }
    }
    const std::string name(absl::StripAsciiWhitespace(s.name));
    if (name.empty()) return Bad(source, s.at.at(kName), kName, "the slice name is empty");
    if (auto [it, fresh] = first_line.emplace(name, s.at.at(kName).line); !fresh) {
      return Bad(source, s.at.at(kName), kName,
                 absl::StrCat("slice '", name, "' is named twice (first on line ", it->second,
                              "); slices must be disjoint"));
    }
    v1::SliceEvidence slice;
    slice.set_name(name);
    std::uint64_t errors = 0, samples = 0;
    if (auto st = CheckCount(source, s, kErrorCount, *s.error_count, &errors); !st.ok()) return st;
    if (auto st = CheckCount(source, s, kSampleCount, *s.sample_count, &samples); !st.ok()) {
      return st;
    }
    if (samples == 0) {
      return Bad(source, s.at.at(kSampleCount), kSampleCount, "a slice needs at least 1 example");
    }
    if (errors > samples) {
      return Bad(source, s.at.at(kErrorCount), kErrorCount,
                 absl::StrCat(errors, " errors exceed the slice's ", samples, " examples"));
    }
    slice.set_error_count(errors);
    slice.set_sample_count(samples);
    out.slices.push_back(slice);
    if (s.max_risk.has_value()) {
      const std::string cell(absl::StripAsciiWhitespace(*s.max_risk));
      if (cell.empty()) continue;  // no per-slice limit for this slice
      double limit = 0;
      if (!absl::SimpleAtod(cell, &limit) || !std::isfinite(limit) || !(limit > 0 && limit < 1)) {
        return Bad(source, s.at.at(kMaxRisk), kMaxRisk,
                   absl::StrCat("'", cell, "' is not a limit in (0, 1)"));
      }
      v1::SliceMaxRisk m;
      m.set_slice_name(name);
      m.set_max_risk(limit);
      out.max_risks.push_back(m);
    }
  }
  if (out.slices.empty()) {
    return absl::InvalidArgumentError(absl::StrCat(source, ": no slices in the file"));
  }
  return out;
}

// ---------------------------------------------------------------- CSV

absl::StatusOr<SlicesFile> ParseCsv(const std::string& text, const std::string& source) {
  std::vector<std::string> columns;
  std::vector<std::uint64_t> starts;  // each header cell's character column
  std::vector<RawSlice> raw;
  bool has_max_risk = false;
  std::uint64_t line_number = 0;
  for (absl::string_view line_view : absl::StrSplit(text, '\n')) {
    ++line_number;
    std::string line(line_view);
    if (!line.empty() && line.back() == '\r') line.pop_back();
    if (absl::StripAsciiWhitespace(line).empty()) continue;  // blank lines are no rows
    // Each cell's 1-based character column (its opening quote, if quoted),
    // as SplitCsvLine found the cells: one per cell, whatever quotes the
    // cells hold (a column count of its own once ran short of the cells
    // for a quote inside an unquoted cell: found by cli_input_fuzz).
    std::vector<std::size_t> offsets;
    auto cells = SplitCsvLine(line, &offsets);
    if (!cells.ok()) {
      return Bad(source, {line_number, 1}, "", cells.status().message());
    }
    std::vector<std::uint64_t> cell_columns;
    for (std::size_t offset : offsets) cell_columns.push_back(offset + 1);
    if (columns.empty()) {
      for (std::size_t i = 0; i < cells->size(); ++i) {
        const std::string cell(absl::StripAsciiWhitespace((*cells)[i]));
        const std::string column = ColumnFor(cell);
        const Where at{line_number, i < cell_columns.size() ? cell_columns[i] : 1};
        if (column.empty()) {
          return Bad(source, at, "",
                     absl::StrCat("unknown column '", cell,
                                  "' in the header (columns: name, error_count, sample_count, "
                                  "and optionally max_risk)"));
        }
        if (std::find(columns.begin(), columns.end(), column) != columns.end()) {
          return Bad(source, at, "", absl::StrCat("column '", column, "' is named twice"));
        }
        columns.push_back(column);
      }
      for (const char* needed : {kName, kErrorCount, kSampleCount}) {
        if (std::find(columns.begin(), columns.end(), needed) == columns.end()) {
          return Bad(source, {line_number, 1}, "",
                     absl::StrCat("the header has no '", needed,
                                  "' column (a header row is needed: name,error_count,"
                                  "sample_count[,max_risk])"));
        }
      }
      has_max_risk = std::find(columns.begin(), columns.end(), kMaxRisk) != columns.end();
      continue;
    }
    if (cells->size() != columns.size()) {
      // Where the first missing cell would start, or the first extra one.
      const std::uint64_t at = cells->size() < columns.size()         ? line.size() + 1
                               : columns.size() < cell_columns.size() ? cell_columns[columns.size()]
                                                                      : 1;
      return Bad(source, {line_number, at}, "",
                 absl::StrCat(cells->size(), " cells where the header has ", columns.size(), " (",
                              absl::StrJoin(columns, ","), ")"));
    }
    RawSlice s;
    s.row = {line_number, 1};
    for (std::size_t i = 0; i < columns.size(); ++i) {
      const std::string& column = columns[i];
      s.at[column] = {line_number, cell_columns[i]};
      const std::string& cell = (*cells)[i];
      if (column == kName) s.name = cell;
      if (column == kErrorCount) s.error_count = cell;
      if (column == kSampleCount) s.sample_count = cell;
      if (column == kMaxRisk) s.max_risk = cell;
    }
    raw.push_back(std::move(s));
  }
  if (columns.empty()) {
    return absl::InvalidArgumentError(
        absl::StrCat(source,
                     ": empty (a header row name,error_count,sample_count[,max_risk] "
                     "and one row per slice)"));
  }
  return Convert(source, raw, has_max_risk);
}

// ---------------------------------------------------------------- JSON

// A JSON value with where it starts. Only as much JSON as a slices file
// needs, but all of it is read (and checked) so that errors have positions.
struct JsonMember;

// (A member is its own struct, not a std::pair holding a JsonValue: a pair
// needs JsonValue complete where the vector is declared, which clang 14 in
// C++20 enforces.)
struct JsonValue {
  enum Kind { kNull, kBool, kNumber, kString, kArray, kObject } kind = kNull;
  Where at;
  std::string text;  // number text or string value
  std::vector<JsonValue> items;
  std::vector<JsonMember> members;
};

// One "key": value of an object, with where the key stands.
struct JsonMember {
  std::string key;
  Where key_at;
  JsonValue value;
};

class JsonReader {
 public:
  JsonReader(const std::string& text, const std::string& source) : s_(text), source_(source) {}

  // Every top-level value of the text (one for a JSON file, one per line for
  // JSON lines).
  absl::StatusOr<std::vector<JsonValue>> ReadAll() {
    std::vector<JsonValue> out;
    SkipSpace();
    while (i_ < s_.size()) {
      JsonValue v;
      if (auto st = Value(&v, 0); !st.ok()) return st;
      out.push_back(std::move(v));
      SkipSpace();
    }
    return out;
  }

 private:
  Where Here() const { return {line_, i_ - line_start_ + 1}; }
  absl::Status Error(absl::string_view what) { return Bad(source_, Here(), "", what); }

  void SkipSpace() {
    while (i_ < s_.size() &&
           (s_[i_] == ' ' || s_[i_] == '\t' || s_[i_] == '\r' || s_[i_] == '\n')) {
      if (s_[i_] == '\n') {
        ++line_;
        line_start_ = i_ + 1;
      }
      ++i_;
    }
  }

  absl::Status Value(JsonValue* v, int depth) {
    if (depth > 32) return Error("nested too deeply");
    SkipSpace();
    v->at = Here();
    if (i_ >= s_.size()) return Error("the JSON ends where a value was expected");
    const char c = s_[i_];
    if (c == '{') return Object(v, depth);
    if (c == '[') return Array(v, depth);
    if (c == '"') {
      v->kind = JsonValue::kString;
      return String(&v->text);
    }
    for (const char* word : {"null", "true", "false"}) {
      if (s_.compare(i_, std::strlen(word), word) == 0) {
        v->kind = word[0] == 'n' ? JsonValue::kNull : JsonValue::kBool;
        v->text = word;
        i_ += std::strlen(word);
        return absl::OkStatus();
      }
    }
    if (c == '-' || absl::ascii_isdigit(static_cast<unsigned char>(c))) {
      v->kind = JsonValue::kNumber;
      const std::size_t start = i_;
      while (i_ < s_.size() &&
             (absl::ascii_isdigit(static_cast<unsigned char>(s_[i_])) || s_[i_] == '-' ||
              s_[i_] == '+' || s_[i_] == '.' || s_[i_] == 'e' || s_[i_] == 'E')) {
        ++i_;
      }
      v->text = s_.substr(start, i_ - start);
      double unused = 0;
      if (!absl::SimpleAtod(v->text, &unused)) {
        i_ = start;
        return Error(absl::StrCat("'", v->text, "' is not a number"));
      }
      return absl::OkStatus();
    }
    return Error(
        absl::StrCat("unexpected '", std::string(1, c), "' (check brackets, quotes and commas)"));
  }

  absl::Status String(std::string* out) {
    ++i_;  // the opening quote
    while (i_ < s_.size() && s_[i_] != '"') {
      const char c = s_[i_];
      if (c == '\n' || static_cast<unsigned char>(c) < 0x20) {
        return Error("a string is not closed on its line");
      }
      if (c != '\\') {
        *out += c;
        ++i_;
        continue;
      }
      if (i_ + 1 >= s_.size()) break;
      const char e = s_[i_ + 1];
      i_ += 2;
      switch (e) {
        case '"': *out += '"'; break;
        case '\\': *out += '\\'; break;
        case '/': *out += '/'; break;
        case 'b': *out += '\b'; break;
        case 'f': *out += '\f'; break;
        case 'n': *out += '\n'; break;
        case 'r': *out += '\r'; break;
        case 't': *out += '\t'; break;
        case 'u': {
          std::uint32_t code = 0;
          if (!Hex4(&code)) return Error("a \\u escape needs four hex digits");
          if (code >= 0xD800 && code < 0xDC00 && s_.compare(i_, 2, "\\u") == 0) {
            i_ += 2;
            std::uint32_t low = 0;
            if (!Hex4(&low) || low < 0xDC00 || low >= 0xE000) {
              return Error("a \\u surrogate pair is broken");
            }
            code = 0x10000 + ((code - 0xD800) << 10) + (low - 0xDC00);
          }
          AppendUtf8(code, out);
          break;
        }
        default: i_ -= 2; return Error(absl::StrCat("unknown escape '\\", std::string(1, e), "'"));
      }
    }
    if (i_ >= s_.size()) return Error("a string is not closed");
    ++i_;  // the closing quote
    return absl::OkStatus();
  }

  bool Hex4(std::uint32_t* code) {
    if (i_ + 4 > s_.size()) return false;
    for (int k = 0; k < 4; ++k) {
      const char h = s_[i_ + k];
      int d = -1;
      if (h >= '0' && h <= '9') d = h - '0';
      if (h >= 'a' && h <= 'f') d = h - 'a' + 10;
      if (h >= 'A' && h <= 'F') d = h - 'A' + 10;
      if (d < 0) return false;
      *code = *code * 16 + static_cast<std::uint32_t>(d);
    }
    i_ += 4;
    return true;
  }

  static void AppendUtf8(std::uint32_t c, std::string* out) {
    if (c < 0x80) {
      *out += static_cast<char>(c);
    } else if (c < 0x800) {
      *out += static_cast<char>(0xC0 | (c >> 6));
      *out += static_cast<char>(0x80 | (c & 0x3F));
    } else if (c < 0x10000) {
      *out += static_cast<char>(0xE0 | (c >> 12));
      *out += static_cast<char>(0x80 | ((c >> 6) & 0x3F));
      *out += static_cast<char>(0x80 | (c & 0x3F));
    } else {
      *out += static_cast<char>(0xF0 | (c >> 18));
      *out += static_cast<char>(0x80 | ((c >> 12) & 0x3F));
      *out += static_cast<char>(0x80 | ((c >> 6) & 0x3F));
      *out += static_cast<char>(0x80 | (c & 0x3F));
    }
  }

  absl::Status Array(JsonValue* v, int depth) {
    v->kind = JsonValue::kArray;
    ++i_;
    SkipSpace();
    if (i_ < s_.size() && s_[i_] == ']') {
      ++i_;
      return absl::OkStatus();
    }
    while (true) {
      JsonValue item;
      if (auto st = Value(&item, depth + 1); !st.ok()) return st;
      v->items.push_back(std::move(item));
      SkipSpace();
      if (i_ < s_.size() && s_[i_] == ',') {
        ++i_;
        continue;
      }
      if (i_ < s_.size() && s_[i_] == ']') {
        ++i_;
        return absl::OkStatus();
      }
      return Error("expected ',' or ']' in an array");
    }
  }

  absl::Status Object(JsonValue* v, int depth) {
    v->kind = JsonValue::kObject;
    ++i_;
    SkipSpace();
    if (i_ < s_.size() && s_[i_] == '}') {
      ++i_;
      return absl::OkStatus();
    }
    while (true) {
      SkipSpace();
      if (i_ >= s_.size() || s_[i_] != '"') return Error("expected a quoted key");
      const Where key_at = Here();
      std::string key;
      if (auto st = String(&key); !st.ok()) return st;
      SkipSpace();
      if (i_ >= s_.size() || s_[i_] != ':') return Error("expected ':' after a key");
      ++i_;
      JsonValue value;
      if (auto st = Value(&value, depth + 1); !st.ok()) return st;
      v->members.push_back({key, key_at, std::move(value)});
      SkipSpace();
      if (i_ < s_.size() && s_[i_] == ',') {
        ++i_;
        continue;
      }
      if (i_ < s_.size() && s_[i_] == '}') {
        ++i_;
        return absl::OkStatus();
      }
      return Error("expected ',' or '}' in an object");
    }
  }

  const std::string& s_;
  const std::string& source_;
  std::size_t i_ = 0;
  std::uint64_t line_ = 1;
  std::size_t line_start_ = 0;
};

absl::Status SliceFromJson(const std::string& source, const JsonValue& v, RawSlice* s,
                           bool* has_max_risk) {
  if (v.kind != JsonValue::kObject) {
    return Bad(source, v.at, "",
               "a slice must be an object {\"name\": ..., \"error_count\": ..., "
               "\"sample_count\": ...}");
  }
  s->row = v.at;
  for (const auto& [key, key_at, value] : v.members) {
    const std::string column = ColumnFor(key);
    if (column.empty()) {
      return Bad(source, key_at, "",
                 absl::StrCat("unknown key '", key,
                              "' (keys: name, error_count, sample_count, max_risk)"));
    }
    if (s->at.count(column)) {
      return Bad(source, key_at, "", absl::StrCat("key '", column, "' is given twice"));
    }
    s->at[column] = value.at;
    if (column == kMaxRisk) {
      *has_max_risk = true;
      if (value.kind == JsonValue::kNull) continue;
      if (value.kind != JsonValue::kNumber && value.kind != JsonValue::kString) {
        return Bad(source, value.at, column, "must be a number in (0, 1) or null");
      }
      s->max_risk = value.text;
      if (s->max_risk->empty()) s->max_risk = "\"\"";  // an empty string is no number
      continue;
    }
    if (column == kName) {
      if (value.kind != JsonValue::kString)
        return Bad(source, value.at, column, "must be a string");
      s->name = value.text;
      continue;
    }
    if (value.kind != JsonValue::kNumber && value.kind != JsonValue::kString) {
      return Bad(source, value.at, column, "must be a whole number >= 0");
    }
    (column == kErrorCount ? s->error_count : s->sample_count) = value.text;
  }
  return absl::OkStatus();
}

absl::StatusOr<SlicesFile> ParseJsonSlices(const std::string& text, const std::string& source) {
  JsonReader reader(text, source);
  auto values = reader.ReadAll();
  if (!values.ok()) return values.status();
  std::vector<const JsonValue*> items;
  if (values->size() == 1 && (*values)[0].kind == JsonValue::kArray) {
    for (const JsonValue& item : (*values)[0].items) items.push_back(&item);
  } else if (values->size() == 1 && (*values)[0].kind == JsonValue::kObject &&
             !(*values)[0].members.empty() && (*values)[0].members[0].key == "slices") {
    const JsonValue& top = (*values)[0];
    if (top.members.size() != 1) {
      return Bad(source, top.members[1].key_at, "",
                 "an object {\"slices\": [...]} has no other keys");
    }
    const JsonValue& list = top.members[0].value;
    if (list.kind != JsonValue::kArray) {
      return Bad(source, list.at, "slices", "must be an array of slices");
    }
    for (const JsonValue& item : list.items) items.push_back(&item);
  } else {
    // JSON lines: one slice object per line.
    for (const JsonValue& item : *values) items.push_back(&item);
  }
  std::vector<RawSlice> raw;
  bool has_max_risk = false;
  for (const JsonValue* item : items) {
    RawSlice s;
    if (auto st = SliceFromJson(source, *item, &s, &has_max_risk); !st.ok()) return st;
    raw.push_back(std::move(s));
  }
  return Convert(source, raw, has_max_risk);
}

}  // namespace

absl::StatusOr<SlicesFile> ParseSlices(const std::string& text, const std::string& source) {
  // A spreadsheet's UTF-8 byte order mark is not part of the first column's
  // name (columns stay counted in characters after it).
  if (absl::StartsWith(text, "\xEF\xBB\xBF")) return ParseSlices(text.substr(3), source);
  const absl::string_view body = absl::StripLeadingAsciiWhitespace(text);
  if (!body.empty() && (body[0] == '[' || body[0] == '{')) return ParseJsonSlices(text, source);
  return ParseCsv(text, source);
}

absl::StatusOr<SlicesFile> ReadSlicesFile(const std::string& path) {
  auto text = ReadInput(path);
  if (!text.ok()) return absl::InvalidArgumentError(std::string(text.status().message()));
  return ParseSlices(*text, path == "-" ? std::string("stdin") : path);
}

std::optional<v1::SliceShareRule> SliceShareRuleFromName(absl::string_view name) {
  std::string word = absl::AsciiStrToUpper(name);
  for (char& c : word) c = c == '-' ? '_' : c;
  absl::string_view w = word;
  absl::ConsumePrefix(&w, "SLICE_SHARE_RULE_");
  if (w == "BONFERRONI") return v1::SLICE_SHARE_RULE_BONFERRONI;
  if (w == "SIDAK") return v1::SLICE_SHARE_RULE_SIDAK;
  return std::nullopt;
}

std::string SliceShareRuleWord(v1::SliceShareRule rule) {
  return rule == v1::SLICE_SHARE_RULE_SIDAK ? "sidak" : "bonferroni";
}

std::vector<OptionSpec> SliceFlagSpecs() {
  return {
      {"slices", "FILE",
       "per-slice hold-out counts: CSV with a header name,error_count,sample_count[,max_risk] "
       "or JSON (evidence.slices; docs/slices.md)"},
      {"slice-sharing", "bonferroni|sidak",
       "how the slices share their delta, default bonferroni (slice_sharing.rule)"},
  };
}

std::optional<int> ReadSliceFlags(const std::string& command, const ParsedArgs& args,
                                  SliceFlags* out, std::ostream& err) {
  if (auto word = args.Get("slice-sharing")) {
    out->rule = SliceShareRuleFromName(*word);
    if (!out->rule.has_value()) {
      return UsageError(
          err, command,
          absl::StrCat("--slice-sharing: '", *word, "' is no share rule (bonferroni or sidak)"));
    }
  }
  if (auto path = args.Get("slices")) {
    if (path->empty()) return UsageError(err, command, "--slices needs a file name");
    auto file = ReadSlicesFile(*path);
    if (!file.ok()) {
      err << "riskbound " << command << ": --slices: " << file.status().message() << "\n";
      return kExitInvalidInput;
    }
    out->file = *std::move(file);
  }
  return std::nullopt;
}

}  // namespace riskbound::cli
