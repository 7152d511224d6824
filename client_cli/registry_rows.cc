#include "client_cli/registry_rows.h"

#include <utility>

#include "absl/strings/ascii.h"
#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_join.h"
#include "absl/strings/str_split.h"
#include "client_cli/format.h"
#include "client_cli/json_io.h"
#include "client_cli/names.h"
#include "google/protobuf/struct.pb.h"
#include "google/protobuf/util/json_util.h"

namespace riskbound::cli {
namespace {

using google::protobuf::Descriptor;
using google::protobuf::FieldDescriptor;
using google::protobuf::Message;
using google::protobuf::Reflection;

constexpr const char* kCsvOutputColumns[] = {"line",
                                             "record_id",
                                             "model_name",
                                             "model_version",
                                             "holdout_set_id",
                                             "outcome",
                                             "verdict",
                                             "risk_upper_bound",
                                             "risk_lower_bound",
                                             "empirical_risk",
                                             "family_name",
                                             "failure_probability",
                                             "vacuous",
                                             "additional_sample_count",
                                             "worst_slice_name",
                                             "worst_slice_upper_bound",
                                             "exceeding_slice_count",
                                             "undecided_slice_count",
                                             "error_code",
                                             "error_fields",
                                             "error_message"};

std::string CsvCell(const std::string& text) {
  if (text.find_first_of(",\"\n\r") == std::string::npos) return text;
  std::string out = "\"";
  for (char c : text) {
    if (c == '"')
      out += "\"\"";
    else if (c == '\n' || c == '\r')
      out += ' ';
    else
      out += c;
  }
  return out + "\"";
}

absl::Status SetScalar(Message* message, const FieldDescriptor* f, const std::string& text,
                       const std::string& column) {
  const Reflection* r = message->GetReflection();
  auto bad = [&](const std::string& what) {
    return absl::InvalidArgumentError(
        absl::StrCat("column ", column, ": '", text, "' is not ", what));
  };
  switch (f->cpp_type()) {
    case FieldDescriptor::CPPTYPE_UINT64: {
      std::uint64_t v = 0;
      if (!absl::SimpleAtoi(text, &v)) return bad("a whole number >= 0");
      r->SetUInt64(message, f, v);
      return absl::OkStatus();
    }
    case FieldDescriptor::CPPTYPE_UINT32: {
      std::uint32_t v = 0;
      if (!absl::SimpleAtoi(text, &v)) return bad("a whole number >= 0");
      r->SetUInt32(message, f, v);
      return absl::OkStatus();
    }
    case FieldDescriptor::CPPTYPE_INT64: {
      std::int64_t v = 0;
      if (!absl::SimpleAtoi(text, &v)) return bad("a whole number");
      r->SetInt64(message, f, v);
      return absl::OkStatus();
    }
    case FieldDescriptor::CPPTYPE_INT32: {
      std::int32_t v = 0;
      if (!absl::SimpleAtoi(text, &v)) return bad("a whole number");
      r->SetInt32(message, f, v);
      return absl::OkStatus();
    }
    case FieldDescriptor::CPPTYPE_DOUBLE: {
      double v = 0;
      if (!absl::SimpleAtod(text, &v)) return bad("a number");
      r->SetDouble(message, f, v);
      return absl::OkStatus();
    }
    case FieldDescriptor::CPPTYPE_FLOAT: {
      float v = 0;
      if (!absl::SimpleAtof(text, &v)) return bad("a number");
      r->SetFloat(message, f, v);
      return absl::OkStatus();
    }
    case FieldDescriptor::CPPTYPE_BOOL: {
      bool v = false;
      if (!absl::SimpleAtob(text, &v)) return bad("true or false");
      r->SetBool(message, f, v);
      return absl::OkStatus();
    }
    case FieldDescriptor::CPPTYPE_STRING: r->SetString(message, f, text); return absl::OkStatus();
    case FieldDescriptor::CPPTYPE_ENUM: {
      const google::protobuf::EnumValueDescriptor* value = f->enum_type()->FindValueByName(text);
      if (value == nullptr && f->enum_type()->full_name() == "riskbound.v1.BoundFamily") {
        if (auto family = FamilyFromName(text)) {
          value = f->enum_type()->FindValueByNumber(*family);
        }
      }
      if (value == nullptr) return bad(absl::StrCat("a value of ", f->enum_type()->full_name()));
      r->SetEnum(message, f, value);
      return absl::OkStatus();
    }
    case FieldDescriptor::CPPTYPE_MESSAGE: break;
  }
  return bad("a value this column can hold");
}

std::string Shortest(double x) { return ShortestDecimal(x); }

}  // namespace

absl::StatusOr<std::vector<std::string>> SplitCsvLine(const std::string& line,
                                                      std::vector<std::size_t>* starts) {
  std::vector<std::string> cells;
  std::string cell;
  std::size_t i = 0;
  const std::size_t n = line.size() > 0 && line.back() == '\r' ? line.size() - 1 : line.size();
  if (starts != nullptr) starts->clear();
  while (true) {
    cell.clear();
    if (starts != nullptr) starts->push_back(i);
    if (i < n && line[i] == '"') {
      ++i;
      bool closed = false;
      while (i < n) {
        if (line[i] == '"') {
          if (i + 1 < n && line[i + 1] == '"') {
            cell += '"';
            i += 2;
            continue;
          }
          closed = true;
          ++i;
          break;
        }
        cell += line[i++];
      }
      if (!closed) return absl::InvalidArgumentError("a quoted cell is not closed");
      if (i < n && line[i] != ',') {
        return absl::InvalidArgumentError("text after a closing quote (quote the whole cell)");
      }
    } else {
      while (i < n && line[i] != ',') cell += line[i++];
    }
    cells.push_back(cell);
    if (i >= n) break;
    ++i;  // the comma
  }
  return cells;
}

absl::StatusOr<CsvColumns> CsvColumns::FromHeader(const std::string& header_line) {
  auto cells = SplitCsvLine(header_line);
  if (!cells.ok()) {
    return absl::InvalidArgumentError(absl::StrCat("the CSV header: ", cells.status().message()));
  }
  CsvColumns out;
  for (std::string name : *cells) {
    name = std::string(absl::StripAsciiWhitespace(name));
    const Descriptor* d = v1::RegistryRecord::descriptor();
    std::vector<const FieldDescriptor*> path;
    bool ok = !name.empty();
    for (absl::string_view part : absl::StrSplit(name, '.')) {
      if (!ok || d == nullptr) {
        ok = false;
        break;
      }
      const FieldDescriptor* f = d->FindFieldByName(std::string(part));
      if (f == nullptr || f->is_repeated()) {
        ok = false;
        break;
      }
      path.push_back(f);
      d = f->type() == FieldDescriptor::TYPE_MESSAGE ? f->message_type() : nullptr;
    }
    if (!ok || path.empty() || path.back()->type() == FieldDescriptor::TYPE_MESSAGE) {
      return absl::InvalidArgumentError(absl::StrCat(
          "the CSV header names column '", name,
          "', which is no single-valued field of riskbound.v1.RegistryRecord (use field paths "
          "such as record_id, evidence.holdout.error_count, "
          "evidence.training.capacity.vc_dimension; docs/score.md lists them)"));
    }
    for (const std::string& seen : out.names_) {
      if (seen == name) {
        return absl::InvalidArgumentError(
            absl::StrCat("the CSV header names column '", name, "' twice"));
      }
    }
    out.names_.push_back(name);
    out.paths_.push_back(std::move(path));
  }
  return out;
}

absl::Status CsvColumns::Fill(const std::string& line, std::uint64_t line_number,
                              v1::RegistryRecord* record) const {
  auto cells = SplitCsvLine(line);
  if (!cells.ok()) {
    return absl::InvalidArgumentError(
        absl::StrCat("line ", line_number, ": ", cells.status().message()));
  }
  if (cells->size() != names_.size()) {
    return absl::InvalidArgumentError(absl::StrCat("line ", line_number, ": ", cells->size(),
                                                   " cells, but the header has ", names_.size(),
                                                   " columns"));
  }
  for (std::size_t c = 0; c < names_.size(); ++c) {
    const std::string text((*cells)[c]);
    if (text.empty()) continue;
    Message* m = record;
    const std::vector<const FieldDescriptor*>& path = paths_[c];
    for (std::size_t k = 0; k + 1 < path.size(); ++k) {
      m = m->GetReflection()->MutableMessage(m, path[k]);
    }
    absl::Status set = SetScalar(m, path.back(), text, names_[c]);
    if (!set.ok()) {
      return absl::InvalidArgumentError(absl::StrCat("line ", line_number, ": ", set.message()));
    }
  }
  return absl::OkStatus();
}

absl::Status ParseJsonLine(const std::string& line, std::uint64_t line_number,
                           v1::RegistryRecord* record) {
  absl::Status status = ParseJson(line, absl::StrCat("line ", line_number), record);
  if (status.ok()) return status;
  // Keep the record's id for the error row when the line is a JSON object
  // with one.
  record->Clear();
  google::protobuf::Struct object;
  if (google::protobuf::util::JsonStringToMessage(line, &object).ok()) {
    for (const char* key : {"record_id", "recordId"}) {
      auto it = object.fields().find(key);
      if (it != object.fields().end() && it->second.has_string_value()) {
        record->set_record_id(it->second.string_value());
      }
    }
  }
  return status;
}

Row LocalErrorRow(std::uint64_t line, const std::string& record_id, const absl::Status& status) {
  Row row;
  row.line = line;
  row.result.set_record_id(record_id);
  v1::RecordError* error = row.result.mutable_error();
  error->set_code(absl::StatusCodeToString(status.code()));
  error->set_message(std::string(status.message()));
  return row;
}

SliceDigest DigestSlices(const v1::RecordResult& result) {
  SliceDigest d;
  if (result.has_gated()) {
    for (const v1::SliceCheck& c : result.gated().slices()) {
      if (d.slice_count == 0 || c.risk_upper_bound() > d.worst_slice_upper_bound) {
        d.worst_slice_name = c.slice_name();
        d.worst_slice_upper_bound = c.risk_upper_bound();
      }
      ++d.slice_count;
      if (c.outcome() == v1::SLICE_OUTCOME_EXCEEDS) d.exceeding.push_back(c.slice_name());
      if (c.outcome() == v1::SLICE_OUTCOME_UNDECIDED) d.undecided.push_back(c.slice_name());
    }
  } else if (result.has_certified() && result.certified().has_slices()) {
    const v1::SliceSummary& s = result.certified().slices();
    d.slice_count = static_cast<std::size_t>(s.slice_certificates_size());
    if (d.slice_count > 0) {
      d.worst_slice_name = s.worst_slice_name();
      d.worst_slice_upper_bound = s.worst_slice_upper_bound();
    }
  }
  return d;
}

std::string FirstNames(const std::vector<std::string>& names, std::size_t shown) {
  std::string text;
  for (std::size_t i = 0; i < names.size() && i < shown; ++i) {
    absl::StrAppend(&text, i == 0 ? "" : ", ", names[i]);
  }
  if (names.size() > shown) absl::StrAppend(&text, " and ", names.size() - shown, " more");
  return text;
}

std::string CsvHeader() { return absl::StrCat(absl::StrJoin(kCsvOutputColumns, ","), "\n"); }

std::string RowText(const Row& row, OutputFormat format) {
  v1::RecordResult result = row.result;
  // What depends on when or in which stream a row was scored is left out,
  // so that a resumed run writes the same bytes: the row's key is its line.
  if (result.has_gated()) result.mutable_gated()->mutable_audit()->clear_timestamp();
  result.clear_record_index();
  if (format == OutputFormat::kJsonLines) {
    google::protobuf::util::JsonPrintOptions options;
    options.preserve_proto_field_names = true;
    std::string json;
    (void)google::protobuf::util::MessageToJsonString(result, &json, options);
    return absl::StrCat("{\"line\":", row.line, ",\"result\":", json, "}\n");
  }
  std::vector<std::string> cells(std::size(kCsvOutputColumns));
  cells[0] = absl::StrCat(row.line);
  cells[1] = result.record_id();
  cells[2] = result.model_name();
  cells[3] = result.model_version();
  cells[4] = result.holdout_set_id();
  cells[11] = result.failure_probability() > 0 ? Shortest(result.failure_probability()) : "";
  if (result.has_gated()) {
    const v1::GateResponse& g = result.gated();
    cells[5] = "gated";
    cells[6] = VerdictWord(g.verdict());
    cells[7] = Shortest(g.risk_certificate().risk_upper_bound());
    if (g.has_risk_lower_bound()) cells[8] = Shortest(g.risk_lower_bound());
    cells[9] = Shortest(g.risk_certificate().empirical_risk());
    cells[10] = g.risk_certificate().family_name();
    cells[12] = g.risk_certificate().vacuous() ? "true" : "false";
    if (g.has_additional_sample_count()) cells[13] = absl::StrCat(g.additional_sample_count());
  } else if (result.has_certified()) {
    const v1::Certificate& t = result.certified().tightest();
    cells[5] = "certified";
    cells[7] = Shortest(t.risk_upper_bound());
    if (t.has_risk_lower_bound()) cells[8] = Shortest(t.risk_lower_bound());
    cells[9] = Shortest(t.empirical_risk());
    cells[10] = t.family_name();
    cells[12] = t.vacuous() ? "true" : "false";
  } else {
    cells[5] = "error";
  }
  if (const SliceDigest d = DigestSlices(result); d.slice_count > 0) {
    cells[14] = d.worst_slice_name;
    cells[15] = Shortest(d.worst_slice_upper_bound);
    if (result.has_gated()) {
      cells[16] = absl::StrCat(d.exceeding.size());
      cells[17] = absl::StrCat(d.undecided.size());
    }
  }
  if (result.has_error()) {
    cells[18] = result.error().code();
    std::vector<std::string> fields;
    for (const auto& v : result.error().field_violations()) fields.push_back(v.field());
    cells[19] = absl::StrJoin(fields, ";");
    cells[20] = result.error().message();
  }
  std::vector<std::string> quoted;
  for (const std::string& c : cells) quoted.push_back(CsvCell(c));
  return absl::StrCat(absl::StrJoin(quoted, ","), "\n");
}

std::optional<Row> RowFromText(const std::string& text, OutputFormat format) {
  Row row;
  if (format == OutputFormat::kJsonLines) {
    const std::string head = "{\"line\":";
    const std::string mid = ",\"result\":";
    if (text.rfind(head, 0) != 0 || text.empty() || text.back() != '}') return std::nullopt;
    const std::size_t m = text.find(mid);
    if (m == std::string::npos) return std::nullopt;
    if (!absl::SimpleAtoi(text.substr(head.size(), m - head.size()), &row.line)) {
      return std::nullopt;
    }
    const std::string json = text.substr(m + mid.size(), text.size() - m - mid.size() - 1);
    if (!google::protobuf::util::JsonStringToMessage(json, &row.result).ok()) return std::nullopt;
    return row;
  }
  auto cells = SplitCsvLine(text);
  if (!cells.ok() || cells->size() != std::size(kCsvOutputColumns)) return std::nullopt;
  const std::vector<std::string>& c = *cells;
  if (!absl::SimpleAtoi(c[0], &row.line)) return std::nullopt;
  v1::RecordResult& r = row.result;
  r.set_record_id(c[1]);
  r.set_model_name(c[2]);
  r.set_model_version(c[3]);
  r.set_holdout_set_id(c[4]);
  double x = 0;
  if (!c[11].empty() && absl::SimpleAtod(c[11], &x)) r.set_failure_probability(x);
  if (c[5] == "gated") {
    v1::GateResponse* g = r.mutable_gated();
    v1::Verdict verdict = v1::VERDICT_UNSPECIFIED;
    v1::Verdict_Parse(absl::StrCat("VERDICT_", c[6]), &verdict);
    g->set_verdict(verdict);
    if (absl::SimpleAtod(c[7], &x)) g->mutable_risk_certificate()->set_risk_upper_bound(x);
    if (!c[8].empty() && absl::SimpleAtod(c[8], &x)) g->set_risk_lower_bound(x);
    if (absl::SimpleAtod(c[9], &x)) g->mutable_risk_certificate()->set_empirical_risk(x);
    g->mutable_risk_certificate()->set_family_name(c[10]);
    g->mutable_risk_certificate()->set_vacuous(c[12] == "true");
    std::uint64_t extra = 0;
    if (!c[13].empty() && absl::SimpleAtoi(c[13], &extra)) g->set_additional_sample_count(extra);
    // The slices as far as the row tells them (DigestSlices gives the same
    // cells back): the worst slice with its bound, and placeholders counting
    // the exceeding and undecided ones.
    if (!c[14].empty() && absl::SimpleAtod(c[15], &x)) {
      std::uint64_t exceeding = 0, undecided = 0;
      if (!absl::SimpleAtoi(c[16], &exceeding) || !absl::SimpleAtoi(c[17], &undecided)) {
        return std::nullopt;
      }
      v1::SliceCheck* worst = g->add_slices();
      worst->set_slice_name(c[14]);
      worst->set_risk_upper_bound(x);
      if (exceeding > 0) {
        worst->set_outcome(v1::SLICE_OUTCOME_EXCEEDS);
        --exceeding;
      } else if (undecided > 0) {
        worst->set_outcome(v1::SLICE_OUTCOME_UNDECIDED);
        --undecided;
      } else {
        worst->set_outcome(v1::SLICE_OUTCOME_CLEARS);
      }
      for (std::uint64_t i = 0; i < exceeding + undecided; ++i) {
        v1::SliceCheck* other = g->add_slices();
        other->set_outcome(i < exceeding ? v1::SLICE_OUTCOME_EXCEEDS
                                         : v1::SLICE_OUTCOME_UNDECIDED);
      }
    }
  } else if (c[5] == "certified") {
    v1::Certificate* t = r.mutable_certified()->mutable_tightest();
    if (absl::SimpleAtod(c[7], &x)) t->set_risk_upper_bound(x);
    if (!c[8].empty() && absl::SimpleAtod(c[8], &x)) t->set_risk_lower_bound(x);
    if (absl::SimpleAtod(c[9], &x)) t->set_empirical_risk(x);
    t->set_family_name(c[10]);
    t->set_vacuous(c[12] == "true");
    if (!c[14].empty() && absl::SimpleAtod(c[15], &x)) {
      v1::SliceSummary* slices = r.mutable_certified()->mutable_slices();
      slices->set_worst_slice_name(c[14]);
      slices->set_worst_slice_upper_bound(x);
      slices->add_slice_certificates();
    }
  } else if (c[5] == "error") {
    r.mutable_error()->set_code(c[18]);
    for (absl::string_view f : absl::StrSplit(c[19], ';', absl::SkipEmpty())) {
      r.mutable_error()->add_field_violations()->set_field(std::string(f));
    }
    r.mutable_error()->set_message(c[20]);
  } else {
    return std::nullopt;
  }
  return row;
}

}  // namespace riskbound::cli
