// The `ogive` command line: its commands, their options and help, and the step from argv to a call
// of the client library. Parsing is separate from running so that tests check every usage rule
// without a server.
//
// Exit status: 0 success; 1 the server refused or failed a call (the gRPC code name and message are
// printed); 2 a usage error (the option or argument is named, with the values allowed); `ogive
// work` also exits 128 + the signal number when stopped by SIGTERM (143) or SIGINT (130).
#ifndef OGIVE_CLIENT_CLI_CLI_H_
#define OGIVE_CLIENT_CLI_CLI_H_

#include <functional>
#include <memory>
#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "absl/strings/string_view.h"
#include "absl/types/span.h"
#include "client/cli/args.h"
#include "client/cli/work.h"
#include "client/client_tls.h"
#include "ogive/v1/campaign.pb.h"

namespace ogive::client {
class Client;
}  // namespace ogive::client

namespace ogive::cli {

inline constexpr int kExitOk = 0;
inline constexpr int kExitServerError = 1;
inline constexpr int kExitUsage = 2;

inline constexpr char kDefaultServer[] = "127.0.0.1:7075";

struct Invocation;

// One subcommand: `ogive campaign create`, `ogive ask`, ...
struct Command {
  std::vector<absl::string_view> words = {};  // {"campaign", "create"}
  absl::string_view synopsis = "";            // what follows the words in the usage line
  absl::string_view summary = "";             // one line for `ogive --help`
  absl::string_view details = "";             // paragraphs for `ogive ... --help`
  std::vector<OptionSpec> options = {};       // besides the global ones
  size_t min_positional = 0;
  size_t max_positional = 0;
  bool takes_program = false;  // `-- PROGRAM [ARGS...]` (ogive work)
  bool prints_data = true;     // --json applies
  int (*run)(const Invocation&) = nullptr;
};

// The options every command takes.
struct GlobalOptions {
  std::string server = kDefaultServer;  // --server, else $OGIVE_SERVER
  double timeout_seconds = 30;          // --timeout: deadline of each call
  bool json = false;                    // --json
  std::string token_file;               // --token-file, else the token is $OGIVE_TOKEN
  client::ClientTls tls;                // --tls, --tls-ca, --tls-cert, --tls-key, --tls-server-name,
                                        // else $OGIVE_TLS_CA, $OGIVE_TLS_CERT, ...
};

// A parsed command line.
struct Invocation {
  const Command* command = nullptr;  // nullptr: no command (top-level help)
  std::vector<std::string> group;    // for help on a group: {"campaign"}
  bool help = false;                 // --help was asked for
  ParsedArgs args;                   // the command's options and arguments
  GlobalOptions globals;
};

// Looks up environment variables; tests pass a fake.
using GetEnv = std::function<const char*(const char*)>;

// Every command, in help order.
const std::vector<Command>& Commands();

// Parses `args` (argv without the program name). INVALID_ARGUMENT with the whole message to print
// ("ogive ask: unknown option '--frob' (see 'ogive ask --help')") on a usage error: an unknown
// command or option, a missing value or argument, an extra argument, `--` where no program is
// taken, or a malformed global option.
absl::StatusOr<Invocation> ParseCommandLine(absl::Span<const std::string> args,
                                            const GetEnv& getenv);

// The help text of `command`, of a group ({"campaign"}), or of `ogive` itself (both empty).
std::string HelpText(const Command* command, const std::vector<std::string>& group);

// The outcome chosen by `ogive tell`'s options (exactly one of --score, --grade, --infeasible,
// --void; --note adds a note). INVALID_ARGUMENT naming the options otherwise, or for a score that
// is not a finite number.
absl::StatusOr<v1::Outcome> OutcomeFromOptions(const ParsedArgs& args);

// The worker loop's options from `ogive work`'s arguments; `default_worker` when --worker is not
// given. INVALID_ARGUMENT naming the option for a bad value or a missing program.
absl::StatusOr<WorkOptions> WorkOptionsFromArgs(const ParsedArgs& args,
                                                const std::string& default_worker);

// "host:pid": the worker name used when --worker is not given.
std::string DefaultWorker();

// For commands defined in files of their own (report_commands.cc): the client the global options ask
// for (INVALID_ARGUMENT naming the option when a TLS or token file cannot be used), and the messages
// and exit codes of a usage error (kExitUsage) and a failed call (kExitServerError).
absl::StatusOr<std::unique_ptr<client::Client>> ClientFor(const Invocation& inv);
int CommandUsageError(const Command& command, absl::string_view message);
int CommandServerError(const Invocation& inv, const absl::Status& status);

// Runs `ogive` with `argc`/`argv`; returns the exit status.
int Main(int argc, char** argv);

}  // namespace ogive::cli

#endif  // OGIVE_CLIENT_CLI_CLI_H_
