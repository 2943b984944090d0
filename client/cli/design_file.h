// Reading a CampaignDesign from a file for `ogive campaign create`: protobuf text format, or JSON (the
// proto3 JSON mapping) for files ending in ".json". Every error names the file, the line and the
// column, so a typo in a design is found at once.
#ifndef OGIVE_CLIENT_CLI_DESIGN_FILE_H_
#define OGIVE_CLIENT_CLI_DESIGN_FILE_H_

#include <string>

#include "absl/status/statusor.h"
#include "absl/strings/string_view.h"
#include "ogive/v1/campaign.pb.h"

namespace ogive::cli {

// True if `file_name` is read as JSON (it ends in ".json", any case); everything else is text
// format
// (".txtpb", ".textproto", ".pb.txt", ...).
bool IsJsonFileName(absl::string_view file_name);

// Parses `contents`, read from `file_name` (which decides the format and names the file in errors).
// INVALID_ARGUMENT "FILE:LINE:COLUMN: what is wrong" (lines and columns from 1) on a syntax error,
// an unknown field, a value of the wrong type, or a byte that is not UTF-8 (columns count bytes);
// "FILE: FIELD: ..." when an escape puts bytes that are not UTF-8 into a string. The design's rules
// (bounds, names) are the server's to check.
absl::StatusOr<v1::CampaignDesign> ParseDesign(absl::string_view file_name,
                                            absl::string_view contents);

// Reads and parses the file at `path`; NOT_FOUND (or the errno's meaning) if it cannot be read.
absl::StatusOr<v1::CampaignDesign> ReadDesignFile(const std::string& path);

}  // namespace ogive::cli

#endif  // OGIVE_CLIENT_CLI_DESIGN_FILE_H_
