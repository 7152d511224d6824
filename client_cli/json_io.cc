#include "client_cli/json_io.h"

#include <fstream>
#include <iostream>
#include <iterator>
#include <sstream>

#include <vector>

#include "absl/strings/str_cat.h"
#include "client_cli/model_flags.h"
#include "client_cli/names.h"
#include "google/protobuf/descriptor.h"
#include "google/protobuf/util/json_util.h"

namespace riskbound::cli {
namespace {

using google::protobuf::Descriptor;
using google::protobuf::FieldDescriptor;

const FieldDescriptor* FieldNamed(const Descriptor* d, const std::string& key) {
  if (d == nullptr) return nullptr;
  for (int i = 0; i < d->field_count(); ++i) {
    const FieldDescriptor* f = d->field(i);
    if (f->name() == key || f->json_name() == key) return f;
  }
  return nullptr;
}

// The enum name a CLI spelling stands for, or "" when `value` is already an
// enum name or names nothing.
std::string CanonicalEnumName(const FieldDescriptor* f, const std::string& value) {
  if (f == nullptr || f->type() != FieldDescriptor::TYPE_ENUM) return "";
  const google::protobuf::EnumDescriptor* e = f->enum_type();
  if (e->FindValueByName(value) != nullptr) return "";
  if (e == v1::BoundFamily_descriptor()) {
    if (auto family = FamilyFromName(value)) return v1::BoundFamily_Name(*family);
  } else if (e == v1::ModelKind_descriptor()) {
    if (auto kind = ModelKindFromName(value)) return v1::ModelKind_Name(*kind);
  }
  return "";
}

}  // namespace

std::string NormalizeEnumWords(const std::string& json, const Descriptor* root) {
  struct Frame {
    bool object;
    const Descriptor* message;     // object frames: the message it fills (null: unknown)
    const FieldDescriptor* field;  // the field the current value belongs to
    bool want_key;
  };
  std::vector<Frame> stack;
  std::string out;
  out.reserve(json.size());
  std::size_t i = 0;
  while (i < json.size()) {
    const char c = json[i];
    if (c == '"') {
      std::size_t j = i + 1;
      bool escaped = false;
      while (j < json.size() && json[j] != '"') {
        if (json[j] == '\\') {
          escaped = true;
          ++j;
        }
        ++j;
      }
      if (j >= json.size()) {  // unterminated: the parser reports it
        out.append(json, i, std::string::npos);
        break;
      }
      const std::string text = json.substr(i + 1, j - i - 1);
      std::string replacement;
      if (!stack.empty() && stack.back().object && stack.back().want_key) {
        stack.back().field = escaped ? nullptr : FieldNamed(stack.back().message, text);
        stack.back().want_key = false;
      } else if (!stack.empty() && !escaped) {
        replacement = CanonicalEnumName(stack.back().field, text);
      }
      if (replacement.empty()) {
        out.append(json, i, j + 1 - i);
      } else {
        absl::StrAppend(&out, "\"", replacement, "\"");
      }
      i = j + 1;
      continue;
    }
    if (c == '{') {
      const Descriptor* d = nullptr;
      if (stack.empty()) {
        d = root;
      } else if (const FieldDescriptor* f = stack.back().field;
                 f != nullptr && f->type() == FieldDescriptor::TYPE_MESSAGE &&
                 f->message_type()->file()->package() == "riskbound.v1") {
        d = f->message_type();
      }
      stack.push_back({true, d, nullptr, true});
    } else if (c == '[') {
      stack.push_back({false, nullptr, stack.empty() ? nullptr : stack.back().field, false});
    } else if (c == '}' || c == ']') {
      if (!stack.empty()) stack.pop_back();
    } else if (c == ',') {
      if (!stack.empty() && stack.back().object) stack.back().want_key = true;
    }
    out += c;
    ++i;
  }
  return out;
}

absl::StatusOr<std::string> ReadInput(const std::string& path) {
  std::stringstream buffer;
  if (path == "-") {
    buffer << std::cin.rdbuf();
    return buffer.str();
  }
  std::ifstream in(path, std::ios::binary);
  if (!in) return absl::NotFoundError(absl::StrCat("cannot read ", path));
  buffer << in.rdbuf();
  return buffer.str();
}

absl::Status ParseJson(const std::string& json, const std::string& source,
                       google::protobuf::Message* message) {
  google::protobuf::util::JsonParseOptions options;
  options.ignore_unknown_fields = false;
  const auto status = google::protobuf::util::JsonStringToMessage(
      NormalizeEnumWords(json, message->GetDescriptor()), message, options);
  if (status.ok()) return absl::OkStatus();
  return absl::InvalidArgumentError(
      absl::StrCat(source, ": not a valid ", message->GetDescriptor()->full_name(),
                   " in the protobuf JSON mapping: ", status.message().as_string()));
}

std::string ToJson(const google::protobuf::Message& message) {
  google::protobuf::util::JsonPrintOptions options;
  options.add_whitespace = true;
  options.always_print_primitive_fields = true;
  std::string out;
  // Printing a valid message cannot fail.
  (void)google::protobuf::util::MessageToJsonString(message, &out, options);
  return out;
}

}  // namespace riskbound::cli
