#include "client/cli/design_file.h"

#include <algorithm>
#include <cerrno>
#include <cstdio>
#include <cstring>
#include <optional>
#include <vector>

#include "absl/strings/ascii.h"
#include "absl/strings/match.h"
#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_split.h"
#include "google/protobuf/descriptor.h"
#include "google/protobuf/io/tokenizer.h"
#include "google/protobuf/message.h"
#include "google/protobuf/text_format.h"
#include "google/protobuf/util/json_util.h"

namespace ogive::cli {
namespace {

// ---- Text format ----

class FirstError : public google::protobuf::io::ErrorCollector {
 public:
  void AddError(int line, google::protobuf::io::ColumnNumber column,
                const std::string& message) override {
    if (!found_) {
      found_ = true;
      line_ = line;
      column_ = column;
      message_ = message;
    }
  }
  bool found() const { return found_; }
  // The first error, positions from 1.
  std::string Describe(absl::string_view file_name, absl::string_view contents) const {
    return absl::StrCat(file_name, ":", line_ + 1, ":", NameColumn(contents) + 1, ": ", message_);
  }

 private:
  // protobuf reports an unknown field at the token after its name; point at the name itself. (Lines
  // with tabs are left alone: protobuf counts a tab as up to eight columns.)
  int NameColumn(absl::string_view contents) const {
    static constexpr absl::string_view kMarker = "no field named \"";
    const size_t at = message_.find(kMarker.data(), 0, kMarker.size());
    if (at == std::string::npos) return column_;
    const size_t start = at + kMarker.size();
    const std::string name = message_.substr(start, message_.find('"', start) - start);
    const std::vector<absl::string_view> lines = absl::StrSplit(contents, '\n');
    if (name.empty() || line_ < 0 || line_ >= static_cast<int>(lines.size())) return column_;
    const absl::string_view line = lines[line_];
    if (line.find('\t') != absl::string_view::npos) return column_;
    const size_t found = line.substr(0, static_cast<size_t>(column_)).rfind(name);
    return found == absl::string_view::npos ? column_ : static_cast<int>(found);
  }

  bool found_ = false;
  int line_ = 0;
  int column_ = 0;
  std::string message_;
};

absl::StatusOr<v1::CampaignDesign> ParseText(absl::string_view file_name, absl::string_view contents) {
  FirstError errors;
  google::protobuf::TextFormat::Parser parser;
  parser.RecordErrorsTo(&errors);
  v1::CampaignDesign design;
  if (!parser.ParseFromString(std::string(contents), &design)) {
    if (errors.found()) return absl::InvalidArgumentError(errors.Describe(file_name, contents));
    return absl::InvalidArgumentError(
        absl::StrCat(file_name, ":1:1: not a CampaignDesign in text format"));
  }
  return design;
}

// ---- JSON ----
//
// protobuf's JSON parser names the field path of an error ("(parameters[0].real.low): invalid
// value") but not where it is in the file. A small strict JSON reader finds syntax errors with
// their positions, and keeps the position of every key and value so that a path can be turned into
// a line and a column.

struct Position {
  int line = 1;
  int column = 1;
};

struct JsonNode {
  enum Kind { kLiteral, kString, kArray, kObject };
  Kind kind = kLiteral;
  Position at;                     // where the value starts
  std::vector<std::string> keys;   // objects: member names, in order...
  std::vector<Position> key_at;    // ...where each name starts...
  std::vector<JsonNode> children;  // ...and the member values; arrays: the items
};

class JsonReader {
 public:
  explicit JsonReader(absl::string_view text) : text_(text) {}

  // Reads one JSON document; on failure, `error()` holds "LINE:COLUMN: message".
  bool Read(JsonNode* root) {
    SkipBlanks();
    if (!Value(root, 0)) return false;
    SkipBlanks();
    if (pos_ < text_.size()) return Fail("unexpected text after the end of the JSON document");
    return true;
  }
  const std::string& error() const { return error_; }

 private:
  static constexpr int kMaxDepth = 64;

  bool Fail(absl::string_view message) {
    error_ = absl::StrCat(here_.line, ":", here_.column, ": ", message);
    return false;
  }
  bool AtEnd() const { return pos_ >= text_.size(); }
  char Peek() const { return AtEnd() ? '\0' : text_[pos_]; }
  void Advance() {
    const char c = text_[pos_++];
    if (c == '\n') {
      ++here_.line;
      here_.column = 1;
    } else if ((c & 0xC0) != 0x80) {  // count code points, not bytes
      ++here_.column;
    }
  }
  void SkipBlanks() {
    while (!AtEnd() && (Peek() == ' ' || Peek() == '\t' || Peek() == '\n' || Peek() == '\r')) {
      Advance();
    }
  }
  bool Expect(char c, absl::string_view what) {
    if (Peek() != c) {
      return Fail(AtEnd()
                      ? absl::StrCat("the file ends where ", what, " was expected")
                      : absl::StrCat("expected ", what, ", found '", std::string(1, Peek()), "'"));
    }
    Advance();
    return true;
  }

  bool Value(JsonNode* node, int depth) {
    if (depth > kMaxDepth) return Fail("nested too deeply");
    node->at = here_;
    switch (Peek()) {
      case '{':
        return Object(node, depth);
      case '[':
        return Array(node, depth);
      case '"':
        node->kind = JsonNode::kString;
        return String(nullptr);
      case '\0':
        if (AtEnd()) return Fail("the file ends where a value was expected");
        [[fallthrough]];
      default:
        node->kind = JsonNode::kLiteral;
        return Literal();
    }
  }

  bool Object(JsonNode* node, int depth) {
    node->kind = JsonNode::kObject;
    Advance();  // '{'
    SkipBlanks();
    if (Peek() == '}') {
      Advance();
      return true;
    }
    while (true) {
      SkipBlanks();
      if (Peek() != '"') return Fail("expected a member name in double quotes");
      node->key_at.push_back(here_);
      std::string key;
      if (!String(&key)) return false;
      node->keys.push_back(std::move(key));
      SkipBlanks();
      if (!Expect(':', "':' after the member name")) return false;
      SkipBlanks();
      node->children.emplace_back();
      if (!Value(&node->children.back(), depth + 1)) return false;
      SkipBlanks();
      if (Peek() == ',') {
        Advance();
        continue;
      }
      return Expect('}', "',' or '}' after an object member");
    }
  }

  bool Array(JsonNode* node, int depth) {
    node->kind = JsonNode::kArray;
    Advance();  // '['
    SkipBlanks();
    if (Peek() == ']') {
      Advance();
      return true;
    }
    while (true) {
      SkipBlanks();
      node->children.emplace_back();
      if (!Value(&node->children.back(), depth + 1)) return false;
      SkipBlanks();
      if (Peek() == ',') {
        Advance();
        continue;
      }
      return Expect(']', "',' or ']' after an array item");
    }
  }

  // A string literal; its text goes to `out` when given (escapes other than \uXXXX decoded, which
  // is enough to match member names).
  bool String(std::string* out) {
    Advance();  // '"'
    while (true) {
      if (AtEnd()) return Fail("the file ends inside a string");
      const char c = Peek();
      if (c == '"') {
        Advance();
        return true;
      }
      if (static_cast<unsigned char>(c) < 0x20) {
        return Fail("control character inside a string (write \\n, \\t, ...)");
      }
      Advance();
      if (c != '\\') {
        if (out != nullptr) *out += c;
        continue;
      }
      const char e = Peek();
      if (absl::string_view("\"\\/bfnrt").find(e) == absl::string_view::npos && e != 'u') {
        return Fail(
            "invalid escape in a string (allowed: \\\" \\\\ \\/ \\b \\f \\n \\r \\t \\uXXXX)");
      }
      Advance();
      if (e == 'u') {
        for (int i = 0; i < 4; ++i) {
          if (!absl::ascii_isxdigit(static_cast<unsigned char>(Peek()))) {
            return Fail("\\u must be followed by four hexadecimal digits");
          }
          Advance();
        }
      } else if (out != nullptr) {
        *out += e;
      }
    }
  }

  // true, false, null or a number.
  bool Literal() {
    const size_t start = pos_;
    while (!AtEnd() && (absl::ascii_isalnum(static_cast<unsigned char>(Peek())) || Peek() == '-' ||
                        Peek() == '+' || Peek() == '.')) {
      ++pos_;  // literals are ASCII on one line: the column moves with the position
      ++here_.column;
    }
    const absl::string_view word = text_.substr(start, pos_ - start);
    if (word == "true" || word == "false" || word == "null") return true;
    double ignored;
    if (!word.empty() &&
        (absl::ascii_isdigit(static_cast<unsigned char>(word[0])) || word[0] == '-') &&
        absl::SimpleAtod(word, &ignored) &&
        word.find_first_of("xXiInN") == absl::string_view::npos) {
      return true;
    }
    here_.column -= static_cast<int>(pos_ - start);
    pos_ = start;
    if (word.empty()) {
      return Fail(
          absl::StrCat("unexpected '", std::string(1, Peek()), "' where a value was expected"));
    }
    return Fail(absl::StrCat("'", word, "' is not a JSON value (strings go in double quotes)"));
  }

  absl::string_view text_;
  size_t pos_ = 0;
  Position here_;
  std::string error_;
};

// "peak_temp", "peakTemp" and "PeakTemp" are the same field to protobuf's JSON parser.
std::string FieldKey(absl::string_view name) {
  std::string key;
  for (char c : name) {
    if (c != '_') key += absl::ascii_tolower(static_cast<unsigned char>(c));
  }
  return key;
}

// Where the field path `path` of a protobuf JSON error points ("parameters[0].real.low",
// "start.values[1].value.real"); `unknown` is a member name that path's object should not have. The
// deepest part of the path that exists gives the position.
Position Locate(const JsonNode& root, absl::string_view path, absl::string_view unknown) {
  const JsonNode* node = &root;
  Position at = root.at;
  int map_entry =
      -1;  // after "values[i]" on an object: the i-th member, whose .key or .value follows
  const JsonNode* map = nullptr;
  for (absl::string_view segment : absl::StrSplit(path, '.', absl::SkipEmpty())) {
    absl::string_view name = segment;
    int index = -1;
    if (const size_t bracket = segment.find('['); bracket != absl::string_view::npos) {
      name = segment.substr(0, bracket);
      const absl::string_view digits = segment.substr(bracket + 1, segment.find(']') - bracket - 1);
      if (!absl::SimpleAtoi(digits, &index)) index = -1;
    }
    if (map != nullptr) {
      if (name == "key") return map->key_at[map_entry];
      node = &map->children[map_entry];
      at = node->at;
      map = nullptr;
      if (name == "value") continue;
    }
    if (node->kind != JsonNode::kObject) return at;
    const JsonNode* next = nullptr;
    for (size_t i = 0; i < node->keys.size(); ++i) {
      if (FieldKey(node->keys[i]) == FieldKey(name)) next = &node->children[i];
    }
    if (next == nullptr) return at;
    node = next;
    at = node->at;
    if (index < 0) continue;
    if (index >= static_cast<int>(node->children.size())) return at;
    if (node->kind == JsonNode::kArray) {
      node = &node->children[index];
      at = node->at;
    } else if (node->kind == JsonNode::kObject) {
      map = node;
      map_entry = index;
      at = node->key_at[index];
    }
  }
  if (map != nullptr) return at;
  if (!unknown.empty() && node->kind == JsonNode::kObject) {
    for (size_t i = 0; i < node->keys.size(); ++i) {
      if (node->keys[i] == unknown) return node->key_at[i];
    }
  }
  return at;
}

absl::StatusOr<v1::CampaignDesign> ParseJson(absl::string_view file_name, absl::string_view contents) {
  JsonNode root;
  JsonReader reader(contents);
  if (!reader.Read(&root)) {
    return absl::InvalidArgumentError(absl::StrCat(file_name, ":", reader.error()));
  }
  v1::CampaignDesign design;
  google::protobuf::util::JsonParseOptions options;
  options.ignore_unknown_fields = false;
  const auto status = google::protobuf::util::JsonStringToMessage(
      google::protobuf::StringPiece(contents.data(), contents.size()), &design, options);
  if (status.ok()) return design;

  // Messages look like "(parameters[0].real) lowx: Cannot find field." or
  // "(parameters[0].real.low): invalid value \"abc\" for type TYPE_DOUBLE".
  std::string message(status.message());
  absl::string_view path;
  absl::string_view unknown;
  absl::string_view rest = message;
  if (absl::ConsumePrefix(&rest, "(")) {
    const size_t close = rest.find(')');
    if (close != absl::string_view::npos) {
      path = rest.substr(0, close);
      absl::string_view after = rest.substr(close + 1);
      if (absl::ConsumePrefix(&after, " ")) unknown = after.substr(0, after.find(':'));
    }
  } else if (const size_t colon = rest.find(": Cannot find field");
             colon != absl::string_view::npos) {
    unknown = rest.substr(0, colon);
  }
  const Position at = Locate(root, path, unknown);
  return absl::InvalidArgumentError(
      absl::StrCat(file_name, ":", at.line, ":", at.column, ": ", message));
}

// ---- UTF-8 ----
//
// A design's strings travel in proto3 `string` fields, which must hold UTF-8: the server's gRPC
// layer refuses a request with anything else, and its error says nothing of where. So the reader
// refuses such a design itself, pointing at the byte (a file saved in Latin-1, say) or naming the
// field (a text-format escape such as "\351" makes the same bytes from plain ASCII).

// Length of the well-formed UTF-8 sequence starting at s[i] (RFC 3629: shortest form, no
// surrogates, at most U+10FFFF), or 0 if none starts there.
size_t Utf8SequenceLength(absl::string_view s, size_t i) {
  const auto byte = [&s](size_t k) { return static_cast<unsigned char>(s[k]); };
  const unsigned char b0 = byte(i);
  if (b0 < 0x80) return 1;
  size_t length = 0;
  unsigned char low = 0x80, high = 0xBF;  // allowed range of the second byte
  if (b0 >= 0xC2 && b0 <= 0xDF) {
    length = 2;
  } else if (b0 >= 0xE0 && b0 <= 0xEF) {
    length = 3;
    if (b0 == 0xE0) low = 0xA0;   // no overlong forms
    if (b0 == 0xED) high = 0x9F;  // no surrogates
  } else if (b0 >= 0xF0 && b0 <= 0xF4) {
    length = 4;
    if (b0 == 0xF0) low = 0x90;
    if (b0 == 0xF4) high = 0x8F;  // at most U+10FFFF
  } else {
    return 0;
  }
  if (i + length > s.size()) return 0;
  if (byte(i + 1) < low || byte(i + 1) > high) return 0;
  for (size_t k = 2; k < length; ++k) {
    if (byte(i + k) < 0x80 || byte(i + k) > 0xBF) return 0;
  }
  return length;
}

// Offset of the first byte that does not start a well-formed sequence, if any.
std::optional<size_t> FirstNonUtf8(absl::string_view s) {
  for (size_t i = 0; i < s.size();) {
    const size_t n = Utf8SequenceLength(s, i);
    if (n == 0) return i;
    i += n;
  }
  return std::nullopt;
}

absl::Status CheckFileIsUtf8(absl::string_view file_name, absl::string_view contents) {
  const std::optional<size_t> at = FirstNonUtf8(contents);
  if (!at.has_value()) return absl::OkStatus();
  const size_t newline = *at == 0 ? absl::string_view::npos : contents.rfind('\n', *at - 1);
  const size_t line = 1 + std::count(contents.begin(), contents.begin() + *at, '\n');
  const size_t column = newline == absl::string_view::npos ? *at + 1 : *at - newline;
  return absl::InvalidArgumentError(
      absl::StrCat(file_name, ":", line, ":", column, ": byte 0x",
                   absl::Hex(static_cast<unsigned char>(contents[*at]), absl::kZeroPad2),
                   " is not UTF-8; save the design file as UTF-8"));
}

// The path of the first string field (in field order) that is not UTF-8, e.g.
// "parameters[2].description", or nullopt.
std::optional<std::string> NonUtf8Field(const google::protobuf::Message& message, const std::string& prefix) {
  using google::protobuf::FieldDescriptor;
  const google::protobuf::Reflection* reflection = message.GetReflection();
  std::vector<const FieldDescriptor*> fields;
  reflection->ListFields(message, &fields);
  for (const FieldDescriptor* field : fields) {
    const std::string name = prefix + field->name();
    const int count = field->is_repeated() ? reflection->FieldSize(message, field) : 1;
    for (int k = 0; k < count; ++k) {
      const std::string at = field->is_repeated() ? absl::StrCat(name, "[", k, "]") : name;
      if (field->type() == FieldDescriptor::TYPE_STRING) {
        const std::string value = field->is_repeated() ? reflection->GetRepeatedString(message, field, k)
                                                       : reflection->GetString(message, field);
        if (FirstNonUtf8(value).has_value()) return at;
      } else if (field->type() == FieldDescriptor::TYPE_MESSAGE) {
        const google::protobuf::Message& inner = field->is_repeated()
                                                     ? reflection->GetRepeatedMessage(message, field, k)
                                                     : reflection->GetMessage(message, field);
        if (std::optional<std::string> found = NonUtf8Field(inner, at + "."); found.has_value()) return found;
      }
    }
  }
  return std::nullopt;
}

}  // namespace

bool IsJsonFileName(absl::string_view file_name) {
  return absl::EndsWithIgnoreCase(file_name, ".json");
}

absl::StatusOr<v1::CampaignDesign> ParseDesign(absl::string_view file_name,
                                            absl::string_view contents) {
  if (absl::Status s = CheckFileIsUtf8(file_name, contents); !s.ok()) return s;
  absl::StatusOr<v1::CampaignDesign> design =
      IsJsonFileName(file_name) ? ParseJson(file_name, contents) : ParseText(file_name, contents);
  if (!design.ok()) return design;
  if (std::optional<std::string> field = NonUtf8Field(*design, ""); field.has_value()) {
    return absl::InvalidArgumentError(absl::StrCat(
        file_name, ": ", *field, ": an escape makes bytes that are not UTF-8; strings must be UTF-8"));
  }
  return design;
}

absl::StatusOr<v1::CampaignDesign> ReadDesignFile(const std::string& path) {
  std::FILE* file = std::fopen(path.c_str(), "rb");
  if (file == nullptr) {
    const int error = errno;
    const std::string message =
        absl::StrCat("cannot read design file '", path, "': ", std::strerror(error));
    return error == ENOENT ? absl::NotFoundError(message) : absl::InvalidArgumentError(message);
  }
  std::string contents;
  char buffer[1 << 16];
  size_t n;
  while ((n = std::fread(buffer, 1, sizeof buffer, file)) > 0) contents.append(buffer, n);
  const bool failed = std::ferror(file) != 0;
  std::fclose(file);
  if (failed)
    return absl::InvalidArgumentError(absl::StrCat("cannot read design file '", path, "'"));
  return ParseDesign(path, contents);
}

}  // namespace ogive::cli
