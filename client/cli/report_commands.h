// The commands that turn a campaign's record into files: `ogive campaign report NAME -o FILE.html` (the
// HTML page of report_page.h) and `ogive campaign export NAME --csv|--json [-o FILE]` (trial_export.h).
// Registered in cli.cc's command table; they reach the server through cli.h's ClientFor().
#ifndef OGIVE_CLIENT_CLI_REPORT_COMMANDS_H_
#define OGIVE_CLIENT_CLI_REPORT_COMMANDS_H_

#include <string>
#include <vector>

#include "absl/status/status.h"
#include "client/cli/cli.h"

namespace ogive::cli {

// Both commands, in help order.
std::vector<Command> ReportCommands();

// Writes `contents` to `path` through a temporary file beside it and a rename, so that a reader never
// sees half a file. INVALID_ARGUMENT naming the path and the system's reason when it cannot.
absl::Status WriteFileAtomically(const std::string& path, const std::string& contents);

}  // namespace ogive::cli

#endif  // OGIVE_CLIENT_CLI_REPORT_COMMANDS_H_
