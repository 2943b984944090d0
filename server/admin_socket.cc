#include "server/admin_socket.h"

#include <sys/stat.h>
#include <unistd.h>

#include <cerrno>
#include <cstring>

#include "absl/strings/str_cat.h"
#include "server/without_reflection.h"

namespace ogive {

std::string AdminSocketPath(const std::string& db) { return db + ".admin.sock"; }

absl::StatusOr<std::unique_ptr<grpc::Server>> StartAdminSocket(const std::string& db, grpc::Service* service) {
  const std::string path = AdminSocketPath(db);
  if (path.size() > kMaxSocketPathBytes) {
    return absl::FailedPreconditionError(absl::StrCat("admin socket '", path, "': longer than ",
                                                      kMaxSocketPathBytes, " bytes; use a shorter --db path"));
  }
  struct stat st;
  if (::lstat(path.c_str(), &st) == 0) {
    if (!S_ISSOCK(st.st_mode)) {
      return absl::FailedPreconditionError(
          absl::StrCat("admin socket '", path, "': something that is not a socket is in the way"));
    }
    if (::unlink(path.c_str()) != 0) {
      return absl::UnavailableError(
          absl::StrCat("admin socket '", path, "': cannot remove the stale socket: ", std::strerror(errno)));
    }
  }
  grpc::ServerBuilder builder;
  builder.AddListeningPort("unix:" + path, grpc::InsecureServerCredentials());
  builder.RegisterService(service);
  builder.SetOption(std::make_unique<WithoutReflection>());
  // The socket is created by the bind inside BuildAndStart: with this mask it is never, even for a
  // moment, open to other users.
  const mode_t old_mask = ::umask(077);
  std::unique_ptr<grpc::Server> server = builder.BuildAndStart();
  ::umask(old_mask);
  if (server == nullptr) return absl::UnavailableError(absl::StrCat("admin socket '", path, "': cannot listen"));
  if (::chmod(path.c_str(), 0600) != 0 || ::lstat(path.c_str(), &st) != 0 || !S_ISSOCK(st.st_mode) ||
      (st.st_mode & 077) != 0) {
    server->Shutdown();
    return absl::UnavailableError(absl::StrCat("admin socket '", path, "': cannot make it private (mode 0600)"));
  }
  return server;
}

}  // namespace ogive
