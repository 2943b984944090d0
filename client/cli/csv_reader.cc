#include "client/cli/csv_reader.h"

#include "absl/strings/str_cat.h"

namespace ogive::cli {

absl::string_view StripByteOrderMark(absl::string_view text) {
  constexpr absl::string_view kBom = "\xEF\xBB\xBF";
  if (text.substr(0, kBom.size()) == kBom) text.remove_prefix(kBom.size());
  return text;
}

char DetectSeparator(absl::string_view text) {
  int commas = 0, semicolons = 0, tabs = 0;
  bool in_quotes = false;
  for (char c : text) {
    if (c == '"') in_quotes = !in_quotes;  // a doubled quote toggles twice: no harm
    if (in_quotes) continue;
    if (c == '\n') break;
    commas += c == ',';
    semicolons += c == ';';
    tabs += c == '\t';
  }
  // On a tie with commas, ';' or the tab wins: a comma beside them is a decimal comma ("1;3,25").
  if (semicolons > 0 && semicolons >= commas && semicolons >= tabs) return ';';
  if (tabs > 0 && tabs >= commas) return '\t';
  return ',';
}

absl::StatusOr<std::vector<CsvRecord>> ParseCsv(absl::string_view text, char separator) {
  std::vector<CsvRecord> records;
  CsvRecord record;
  std::string field;
  int line = 1;
  record.line = 1;
  bool in_quotes = false;
  bool field_was_quoted = false;
  bool record_has_content = false;
  auto end_field = [&] {
    record.fields.push_back(std::move(field));
    field.clear();
    field_was_quoted = false;
  };
  auto end_record = [&] {
    end_field();
    const bool blank = record.fields.size() == 1 && record.fields[0].empty() && !record_has_content;
    if (!blank) records.push_back(std::move(record));
    record = CsvRecord();
    record_has_content = false;
  };
  for (size_t i = 0; i < text.size(); ++i) {
    const char c = text[i];
    if (in_quotes) {
      if (c == '"') {
        if (i + 1 < text.size() && text[i + 1] == '"') {
          field += '"';
          ++i;
        } else {
          in_quotes = false;
        }
      } else {
        if (c == '\n') ++line;
        field += c;
      }
      continue;
    }
    switch (c) {
      case '"':
        if (!field.empty() || field_was_quoted) {
          return absl::InvalidArgumentError(
              absl::StrCat("line ", line, ": a double quote inside an unquoted field (RFC 4180: quote the whole "
                           "field and double the quotes inside it)"));
        }
        in_quotes = true;
        field_was_quoted = true;
        record_has_content = true;
        break;
      case '\r':
        if (i + 1 < text.size() && text[i + 1] == '\n') break;  // CRLF: the LF ends the record
        field += c;
        break;
      case '\n':
        end_record();
        ++line;
        record.line = line;
        break;
      default:
        if (c == separator) {
          end_field();
          record_has_content = true;
          break;
        }
        if (field_was_quoted) {
          return absl::InvalidArgumentError(
              absl::StrCat("line ", line, ": text after the closing quote of a field"));
        }
        field += c;
        record_has_content = true;
    }
  }
  if (in_quotes) {
    return absl::InvalidArgumentError(
        absl::StrCat("line ", record.line, ": a quoted field is never closed (missing '\"')"));
  }
  if (!field.empty() || !record.fields.empty() || record_has_content) end_record();
  return records;
}

}  // namespace ogive::cli
