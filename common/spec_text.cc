// ParseSpecText (common/spec.h): protobuf text format into a RunSpec, with
// errors a person can act on. Three things the bare parser gets wrong are
// fixed here:
// - It reports a problem at the token after it (for `colour: 3` the parser has
//   already read `colour` when it finds there is no such field, and points at
//   `:`). The position of the quoted token is used when the message quotes
//   one that appears on the reported line or the one before.
// - Its columns count bytes; ours count characters (a tab is one).
// - It accepts bytes that are not UTF-8 into string fields, and the spec then
//   fails later when serialised, with libprotobuf log lines. Every string
//   field is checked here instead, naming the field and the position.
#include <cstdint>
#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "common/spec.h"
#include "google/protobuf/descriptor.h"
#include "google/protobuf/io/tokenizer.h"
#include "google/protobuf/text_format.h"

namespace skerry {
namespace {

using google::protobuf::FieldDescriptor;
using google::protobuf::Message;
using google::protobuf::Reflection;
using skerry::v1::RunSpec;

// Length of the valid UTF-8 sequence at text[i], or 0 when it is not one
// (RFC 3629, section 4: no overlong forms, no surrogates, at most U+10FFFF).
size_t Utf8SequenceLength(absl::string_view text, size_t i) {
  const auto byte = [&](size_t k) {
    return k < text.size() ? static_cast<uint8_t>(text[k]) : 0;
  };
  const uint8_t b0 = byte(i);
  auto cont = [&](size_t k) { return (byte(k) & 0xC0) == 0x80; };
  if (b0 < 0x80) return 1;
  if (b0 >= 0xC2 && b0 <= 0xDF) return cont(i + 1) ? 2 : 0;
  if (b0 >= 0xE0 && b0 <= 0xEF) {
    const uint8_t b1 = byte(i + 1);
    if (b0 == 0xE0 && b1 < 0xA0) return 0;  // overlong
    if (b0 == 0xED && b1 > 0x9F) return 0;  // surrogates
    return cont(i + 1) && cont(i + 2) ? 3 : 0;
  }
  if (b0 >= 0xF0 && b0 <= 0xF4) {
    const uint8_t b1 = byte(i + 1);
    if (b0 == 0xF0 && b1 < 0x90) return 0;  // overlong
    if (b0 == 0xF4 && b1 > 0x8F) return 0;  // above U+10FFFF
    return cont(i + 1) && cont(i + 2) && cont(i + 3) ? 4 : 0;
  }
  return 0;
}

// Offset of the first byte that does not start a valid UTF-8 sequence, or
// npos.
size_t FirstInvalidUtf8(absl::string_view text) {
  for (size_t i = 0; i < text.size();) {
    const size_t n = Utf8SequenceLength(text, i);
    if (n == 0) return i;
    i += n;
  }
  return absl::string_view::npos;
}

// Characters in text[0, bytes): a byte that starts no valid sequence counts
// as one character.
size_t Characters(absl::string_view text, size_t bytes) {
  size_t count = 0;
  for (size_t i = 0; i < bytes && i < text.size(); ++count) {
    const size_t n = Utf8SequenceLength(text, i);
    i += n == 0 ? 1 : n;
  }
  return count;
}

// Byte offset where 0-based `line` starts, or npos past the end.
size_t LineStart(absl::string_view text, int line) {
  size_t at = 0;
  for (int l = 0; l < line; ++l) {
    at = text.find('\n', at);
    if (at == absl::string_view::npos) return at;
    ++at;
  }
  return at;
}

// "LINE:COLUMN" (1-based, column in characters) of byte offset `at`.
std::string Position(absl::string_view text, size_t at) {
  const size_t line_start =
      at == 0 ? 0 : text.rfind('\n', at - 1) + 1;  // npos + 1 == 0
  int line = 1;
  for (size_t i = 0; i < line_start; ++i) line += text[i] == '\n';
  return absl::StrCat(line, ":",
                      Characters(text.substr(line_start), at - line_start) + 1);
}

// The protobuf tokenizer's column (bytes, a tab advancing to the next
// multiple of 8) on `line`, as a byte offset into the text.
size_t OffsetOfColumn(absl::string_view text, int line, int column) {
  size_t at = LineStart(text, line);
  if (at == absl::string_view::npos) return text.size();
  int col = 0;
  while (at < text.size() && text[at] != '\n' && col < column) {
    col = text[at] == '\t' ? col + 8 - col % 8 : col + 1;
    ++at;
  }
  return at;
}

// Keeps the first error the parser reports, as a byte offset and message.
class FirstErrorCollector : public google::protobuf::io::ErrorCollector {
 public:
  void AddError(int line, google::protobuf::io::ColumnNumber column,
                const std::string& message) override {
    if (has_error_) return;
    has_error_ = true;
    line_ = line;
    column_ = column;
    message_ = message;
  }
  bool has_error() const { return has_error_; }
  int line() const { return line_; }
  int column() const { return column_; }
  const std::string& message() const { return message_; }

 private:
  bool has_error_ = false;
  int line_ = -1;
  int column_ = 0;
  std::string message_;
};

// Where the problem is: the token the message quotes last, when it appears
// on the reported line or the one before, else the reported position.
size_t ProblemOffset(absl::string_view text, const FirstErrorCollector& e) {
  const size_t reported = OffsetOfColumn(text, e.line(), e.column());
  // The last quoted token: `Message type "skerry.v1.RunSpec" has no field
  // named "colour".` is about "colour".
  const std::string& m = e.message();
  const size_t close = m.rfind('"');
  const size_t open = close == std::string::npos || close == 0
                          ? std::string::npos
                          : m.rfind('"', close - 1);
  if (open == std::string::npos || close == open + 1) return reported;
  const std::string token = m.substr(open + 1, close - open - 1);
  const size_t from = LineStart(text, e.line() > 0 ? e.line() - 1 : 0);
  const size_t found = text.substr(0, reported).rfind(token);
  if (found == absl::string_view::npos || found < from) return reported;
  // Only a whole token, not part of a longer name.
  auto word = [](char c) {
    return (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') ||
           (c >= '0' && c <= '9') || c == '_';
  };
  if (found > 0 && word(text[found - 1]) && word(token.front())) {
    return reported;
  }
  return found;
}

// Every string field of `m` (recursively) must be UTF-8; InvalidArgument
// names the first that is not by its path ("evaluator.external.args[1]").
absl::Status CheckStrings(const Message& m, const std::string& prefix,
                          absl::string_view text, absl::string_view filename) {
  const Reflection* r = m.GetReflection();
  std::vector<const FieldDescriptor*> fields;
  r->ListFields(m, &fields);
  for (const FieldDescriptor* f : fields) {
    const std::string name = absl::StrCat(prefix, f->name());
    const int n = f->is_repeated() ? r->FieldSize(m, f) : 1;
    for (int i = 0; i < n; ++i) {
      const std::string path =
          f->is_repeated() ? absl::StrCat(name, "[", i, "]") : name;
      if (f->cpp_type() == FieldDescriptor::CPPTYPE_MESSAGE) {
        const Message& sub = f->is_repeated() ? r->GetRepeatedMessage(m, f, i)
                                              : r->GetMessage(m, f);
        absl::Status s = CheckStrings(sub, path + ".", text, filename);
        if (!s.ok()) return s;
      } else if (f->type() == FieldDescriptor::TYPE_STRING) {
        std::string scratch;
        const std::string& value =
            f->is_repeated() ? r->GetRepeatedStringReference(m, f, i, &scratch)
                             : r->GetStringReference(m, f, &scratch);
        const size_t bad = FirstInvalidUtf8(value);
        if (bad == absl::string_view::npos) continue;
        const size_t in_text = FirstInvalidUtf8(text);
        // The position of the raw byte, when the file holds it (an escape
        // such as \377 is valid text).
        const std::string where =
            in_text == absl::string_view::npos
                ? std::string(filename)
                : absl::StrCat(filename, ":", Position(text, in_text));
        return absl::InvalidArgumentError(absl::StrCat(
            where, ": ", path, ": not valid UTF-8 text (byte ",
            absl::StrFormat("0x%02X", static_cast<unsigned>(
                                          static_cast<uint8_t>(value[bad]))),
            " at character ", Characters(value, bad) + 1,
            " of the value); a spec file must be UTF-8, and a bytes escape "
            "like \\377 must stand for UTF-8 too"));
      }
    }
  }
  return absl::OkStatus();
}

}  // namespace

absl::StatusOr<RunSpec> ParseSpecText(absl::string_view text,
                                      absl::string_view filename) {
  google::protobuf::TextFormat::Parser parser;
  FirstErrorCollector errors;
  parser.RecordErrorsTo(&errors);
  RunSpec spec;
  if (!parser.ParseFromString(std::string(text), &spec)) {
    if (!errors.has_error()) {
      return absl::InvalidArgumentError(
          absl::StrCat(filename, ": cannot parse run spec"));
    }
    if (errors.line() < 0) {
      return absl::InvalidArgumentError(
          absl::StrCat(filename, ": ", errors.message()));
    }
    return absl::InvalidArgumentError(
        absl::StrCat(filename, ":", Position(text, ProblemOffset(text, errors)),
                     ": ", errors.message()));
  }
  absl::Status utf8 = CheckStrings(spec, "", text, filename);
  if (!utf8.ok()) return utf8;
  return spec;
}

}  // namespace skerry
