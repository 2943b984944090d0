#include "server/token_command.h"

#include <fcntl.h>
#include <sys/file.h>
#include <unistd.h>

#include <algorithm>
#include <cerrno>
#include <chrono>
#include <cstdio>
#include <filesystem>
#include <memory>
#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_join.h"
#include "absl/time/clock.h"
#include "absl/time/time.h"
#include "grpcpp/grpcpp.h"
#include "ogive/v1/token_admin.grpc.pb.h"
#include "server/admin_socket.h"
#include "server/service/token_admin.h"
#include "storage/sqlite_store.h"

namespace ogive {
namespace {

constexpr char kTokenUsage[] =
    "usage: ogived token create --db PATH --role ROLE --label LABEL [--campaign NAME]...\n"
    "       ogived token list   --db PATH\n"
    "       ogived token revoke --db PATH LABEL\n"
    "\n"
    "Administers the access tokens of an ogive database file.\n"
    "\n"
    "  create   makes a token and prints it on standard output, once: only its SHA-256 digest is\n"
    "           stored. ROLE is reader (GetCampaign, ListCampaigns, ListTrials, ListGenerations, Watch), worker (+ Ask,\n"
    "           Tell, Renew) or admin (+ CreateCampaign, SetPhase). Each --campaign limits the token to\n"
    "           that campaign (repeat it for more); without --campaign it may use every campaign. LABEL\n"
    "           (1..64 letters, digits, '_', '-', '.', '@') names the token in trial lists, the\n"
    "           event log and the server log; labels are never reused.\n"
    "  list     labels, roles, campaigns, creation and revocation times; never a token.\n"
    "  revoke   refuses the token from now on (a running server at once).\n"
    "\n"
    "While an ogived serves PATH, the command goes through that server's admin socket\n"
    "(PATH.admin.sock); otherwise it opens PATH itself.\n";

struct TokenArgs {
  std::string command;
  std::string db;
  std::string role;
  std::string label;
  std::vector<std::string> campaigns;
  std::vector<std::string> positional;
};

int Usage(const std::string& message) {
  std::fprintf(stderr, "ogived token: %s\n\n%s", message.c_str(), kTokenUsage);
  return 2;
}

int Failed(const absl::Status& status) {
  std::fprintf(stderr, "ogived token: %s (%s)\n", std::string(status.message()).c_str(),
               absl::StatusCodeToString(status.code()).c_str());
  return 1;
}

std::string Time(int64_t unix_ms) {
  return absl::FormatTime("%Y-%m-%dT%H:%M:%SZ", absl::FromUnixMillis(unix_ms), absl::UTCTimeZone());
}

std::string Scope(const v1::TokenInfo& t) { return t.campaigns().empty() ? "*" : absl::StrJoin(t.campaigns(), ","); }

// True when another process (a running ogived) holds the database's single-writer lock.
bool ServerHoldsDatabase(const std::string& db) {
  const int fd = ::open((db + ".lock").c_str(), O_RDONLY | O_CLOEXEC);
  if (fd < 0) return false;
  const bool held = ::flock(fd, LOCK_EX | LOCK_NB) != 0 && errno == EWOULDBLOCK;
  ::close(fd);  // releases the lock if we took it
  return held;
}

// The three operations, either on the file or through a running server.
class Backend {
 public:
  virtual ~Backend() = default;
  virtual absl::StatusOr<v1::CreateTokenResponse> Create(const v1::CreateTokenRequest& request) = 0;
  virtual absl::StatusOr<v1::ListTokensResponse> List() = 0;
  virtual absl::StatusOr<v1::RevokeTokenResponse> Revoke(const v1::RevokeTokenRequest& request) = 0;
};

class FileBackend final : public Backend {
 public:
  explicit FileBackend(std::unique_ptr<storage::SqliteStore> store)
      : store_(std::move(store)), admin_(store_.get(), [] { return absl::Now(); }) {}
  absl::StatusOr<v1::CreateTokenResponse> Create(const v1::CreateTokenRequest& request) override {
    return admin_.Create(request);
  }
  absl::StatusOr<v1::ListTokensResponse> List() override { return admin_.List(); }
  absl::StatusOr<v1::RevokeTokenResponse> Revoke(const v1::RevokeTokenRequest& request) override {
    return admin_.Revoke(request);
  }

 private:
  std::unique_ptr<storage::SqliteStore> store_;
  service::TokenAdmin admin_;
};

class SocketBackend final : public Backend {
 public:
  explicit SocketBackend(const std::string& db)
      : path_(AdminSocketPath(db)),
        stub_(v1::TokenAdmin::NewStub(grpc::CreateChannel("unix:" + path_, grpc::InsecureChannelCredentials()))) {}
  absl::StatusOr<v1::CreateTokenResponse> Create(const v1::CreateTokenRequest& request) override {
    return Call(&v1::TokenAdmin::Stub::CreateToken, request);
  }
  absl::StatusOr<v1::ListTokensResponse> List() override {
    return Call(&v1::TokenAdmin::Stub::ListTokens, v1::ListTokensRequest());
  }
  absl::StatusOr<v1::RevokeTokenResponse> Revoke(const v1::RevokeTokenRequest& request) override {
    return Call(&v1::TokenAdmin::Stub::RevokeToken, request);
  }

 private:
  template <typename Request, typename Response>
  absl::StatusOr<Response> Call(grpc::Status (v1::TokenAdmin::Stub::*method)(grpc::ClientContext*, const Request&,
                                                                             Response*),
                                const Request& request) {
    grpc::ClientContext context;
    context.set_deadline(std::chrono::system_clock::now() + std::chrono::seconds(10));
    Response response;
    const grpc::Status status = ((*stub_).*method)(&context, request, &response);
    if (status.ok()) return response;
    std::string message = status.error_message();
    if (status.error_code() == grpc::StatusCode::UNAVAILABLE || status.error_code() == grpc::StatusCode::DEADLINE_EXCEEDED) {
      message = absl::StrCat("a running ogived holds the database, but its admin socket '", path_,
                             "' does not answer (", message, ")");
    }
    return absl::Status(static_cast<absl::StatusCode>(status.error_code()), message);
  }

  const std::string path_;
  std::unique_ptr<v1::TokenAdmin::Stub> stub_;
};

absl::StatusOr<std::unique_ptr<Backend>> OpenBackend(const TokenArgs& args) {
  if (ServerHoldsDatabase(args.db)) {
    std::fprintf(stderr, "ogived token: a running ogived holds '%s'; asking it through %s\n", args.db.c_str(),
                 AdminSocketPath(args.db).c_str());
    return std::unique_ptr<Backend>(new SocketBackend(args.db));
  }
  if (args.command != "create" && !std::filesystem::exists(args.db)) {
    return absl::NotFoundError(absl::StrCat("--db: no database file at '", args.db, "'"));
  }
  absl::StatusOr<std::unique_ptr<storage::SqliteStore>> store = storage::SqliteStore::Open(args.db);
  if (!store.ok()) {
    return absl::Status(store.status().code(),
                        absl::StrCat("cannot open '", args.db, "': ", store.status().message()));
  }
  return std::unique_ptr<Backend>(new FileBackend(*std::move(store)));
}

int Create(Backend& backend, const TokenArgs& args) {
  v1::CreateTokenRequest request;
  request.set_label(args.label);
  request.set_role(args.role);
  for (const std::string& s : args.campaigns) request.add_campaigns(s);
  absl::StatusOr<v1::CreateTokenResponse> created = backend.Create(request);
  if (!created.ok()) return Failed(created.status());
  std::printf("%s\n", created->secret().c_str());
  std::fflush(stdout);
  std::fprintf(stderr,
               "ogived token: created token '%s' (role %s, campaigns %s). It is shown only this once and\n"
               "stored nowhere: keep it in a file only its users can read (ogive --token-file PATH).\n",
               created->token().label().c_str(), created->token().role().c_str(),
               created->token().campaigns().empty() ? "all" : Scope(created->token()).c_str());
  return 0;
}

int List(Backend& backend) {
  absl::StatusOr<v1::ListTokensResponse> listed = backend.List();
  if (!listed.ok()) return Failed(listed.status());
  std::vector<std::vector<std::string>> rows = {{"LABEL", "ROLE", "CAMPAIGNS", "CREATED", "REVOKED"}};
  for (const v1::TokenInfo& t : listed->tokens()) {
    rows.push_back({t.label(), t.role(), Scope(t), Time(t.created_at_unix_ms()),
                    t.revoked() ? Time(t.revoked_at_unix_ms()) : "-"});
  }
  std::vector<size_t> width(rows[0].size(), 0);
  for (const auto& row : rows) {
    for (size_t i = 0; i < row.size(); ++i) width[i] = std::max(width[i], row[i].size());
  }
  for (const auto& row : rows) {
    std::string line;
    for (size_t i = 0; i < row.size(); ++i) {
      line += row[i];
      if (i + 1 < row.size()) line += std::string(width[i] - row[i].size() + 2, ' ');
    }
    std::printf("%s\n", line.c_str());
  }
  return 0;
}

int Revoke(Backend& backend, const TokenArgs& args) {
  v1::RevokeTokenRequest request;
  request.set_label(args.label);
  absl::StatusOr<v1::RevokeTokenResponse> revoked = backend.Revoke(request);
  if (!revoked.ok()) return Failed(revoked.status());
  if (revoked->already_revoked()) {
    std::printf("token '%s' had been revoked already (at %s)\n", args.label.c_str(),
                Time(revoked->token().revoked_at_unix_ms()).c_str());
  } else {
    std::printf("revoked token '%s'\n", args.label.c_str());
  }
  return 0;
}

}  // namespace

int RunTokenCommand(int argc, char** argv) {
  TokenArgs args;
  for (int i = 1; i < argc; ++i) {
    const std::string arg = argv[i];
    if (arg == "--help" || arg == "-h") {
      std::fputs(kTokenUsage, stdout);
      return 0;
    }
    if (arg.rfind("--", 0) == 0) {
      const size_t eq = arg.find('=');
      const std::string name = arg.substr(0, eq);
      if (name != "--db" && name != "--role" && name != "--label" && name != "--campaign") {
        return Usage(absl::StrCat("unknown option '", name, "'"));
      }
      std::string value;
      if (eq != std::string::npos) {
        value = arg.substr(eq + 1);
      } else if (i + 1 < argc) {
        value = argv[++i];
      } else {
        return Usage(absl::StrCat(name, ": needs a value"));
      }
      if (name == "--db") {
        args.db = value;
      } else if (name == "--role") {
        args.role = value;
      } else if (name == "--label") {
        args.label = value;
      } else {
        args.campaigns.push_back(value);
      }
    } else if (args.command.empty()) {
      args.command = arg;
    } else {
      args.positional.push_back(arg);
    }
  }
  if (args.command.empty()) return Usage("which command: create, list or revoke?");
  if (args.command != "create" && args.command != "list" && args.command != "revoke") {
    return Usage(absl::StrCat("unknown command '", args.command, "' (create, list or revoke)"));
  }
  if (args.db.empty()) return Usage("--db: the database file is required");
  if (args.command == "create") {
    if (!args.positional.empty()) return Usage(absl::StrCat("create: unexpected argument '", args.positional[0], "'"));
    if (args.role.empty()) return Usage("--role: required (reader, worker or admin)");
    if (args.label.empty()) return Usage("--label: required (it names the token in the audit)");
  } else if (args.command == "revoke") {
    if (args.positional.size() != 1 || !args.label.empty() || !args.role.empty() || !args.campaigns.empty()) {
      return Usage("revoke: takes --db PATH and one LABEL");
    }
    args.label = args.positional[0];
  } else if (!args.positional.empty() || !args.label.empty() || !args.role.empty() || !args.campaigns.empty()) {
    return Usage("list: takes only --db PATH");
  }
  absl::StatusOr<std::unique_ptr<Backend>> backend = OpenBackend(args);
  if (!backend.ok()) return Failed(backend.status());
  if (args.command == "create") return Create(**backend, args);
  if (args.command == "list") return List(**backend);
  return Revoke(**backend, args);
}

}  // namespace ogive
