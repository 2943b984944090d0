// The admin socket of a running ogived: a Unix socket beside the database file
// (<db>.admin.sock, mode 0600) that serves TokenAdmin (proto/ogive/v1/token_admin.proto), so that
// `ogived token` can create and revoke tokens while the server holds the database's single-writer
// lock. Its file mode is its access check: whoever may open it may write the database anyway.
#ifndef OGIVE_SERVER_ADMIN_SOCKET_H_
#define OGIVE_SERVER_ADMIN_SOCKET_H_

#include <memory>
#include <string>

#include "absl/status/statusor.h"
#include "grpcpp/grpcpp.h"

namespace ogive {

// The socket's path for the database file `db`.
std::string AdminSocketPath(const std::string& db);

// Longest socket path the kernel accepts (sun_path holds 108 bytes with the terminating zero).
inline constexpr size_t kMaxSocketPathBytes = 107;

// A gRPC server on the admin socket of `db`, serving `service` (which outlives it). Removes a stale
// socket left by a server that died (the caller holds the database's writer lock, so no live server
// owns it), creates the new one with mode 0600 and checks it. FAILED_PRECONDITION when the path
// is too long or names something that is not a socket; UNAVAILABLE when it cannot listen.
absl::StatusOr<std::unique_ptr<grpc::Server>> StartAdminSocket(const std::string& db, grpc::Service* service);

}  // namespace ogive

#endif  // OGIVE_SERVER_ADMIN_SOCKET_H_
