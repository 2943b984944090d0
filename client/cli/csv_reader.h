// Reading CSV as RFC 4180 defines it: comma-separated fields, records ended by CRLF or LF, fields
// in double quotes may hold commas, line breaks and doubled quotes. Each record keeps the line it
// starts on, so errors about a row can name it. Also what common spreadsheet programs write instead:
// a UTF-8 byte-order mark first, and ';' or a tab between fields. Pure, unit-tested.
#ifndef OGIVE_CLIENT_CLI_CSV_READER_H_
#define OGIVE_CLIENT_CLI_CSV_READER_H_

#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "absl/strings/string_view.h"

namespace ogive::cli {

struct CsvRecord {
  int line = 0;  // 1-based line of the file where the record starts
  std::vector<std::string> fields;
};

// Every record of `text`, fields separated by `separator`; blank lines are skipped.
// INVALID_ARGUMENT naming the line for a quote that never closes or a quote inside an unquoted
// field.
absl::StatusOr<std::vector<CsvRecord>> ParseCsv(absl::string_view text, char separator = ',');

// `text` without a leading UTF-8 byte-order mark (EF BB BF).
absl::string_view StripByteOrderMark(absl::string_view text);

// The separator of `text`: whichever of ',', ';' and tab occurs most often outside quotes in its
// first record; on a tie with ',' the other one (a comma beside ';' or a tab is a decimal comma,
// "1;3,25"); ',' when none occurs.
char DetectSeparator(absl::string_view text);

}  // namespace ogive::cli

#endif  // OGIVE_CLIENT_CLI_CSV_READER_H_
