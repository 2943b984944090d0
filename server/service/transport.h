// Transport: how ogived secures its listening port. From the --tls-* flags it builds gRPC server
// credentials (TLS, optionally requiring client certificates signed by a given CA), or plain text,
// which is allowed on a loopback address only unless the operator passes --allow-insecure-remote.
//
// The certificate files are read and checked once, before the server starts, so that a missing,
// unreadable or mismatched file is an error at start that names the flag and the path, not a failed
// handshake later. Plain values; no ownership beyond the returned credentials.
#ifndef OGIVE_SERVER_SERVICE_TRANSPORT_H_
#define OGIVE_SERVER_SERVICE_TRANSPORT_H_

#include <memory>
#include <string>

#include "absl/status/statusor.h"
#include "absl/strings/string_view.h"
#include "grpcpp/security/server_credentials.h"

namespace ogive::service {

// The transport flags of ogived.
struct TransportFlags {
  std::string tls_cert_path;       // --tls-cert: PEM certificate chain, the server's own first
  std::string tls_key_path;        // --tls-key: PEM private key of that certificate
  std::string tls_client_ca_path;  // --tls-client-ca: PEM CA certificates; set = client certs required
  bool allow_insecure_remote = false;  // --allow-insecure-remote: plain text beyond loopback
};

enum class TransportMode {
  kPlainLoopback,  // no TLS, loopback address only
  kPlainRemote,    // no TLS on a non-loopback address (--allow-insecure-remote)
  kTls,            // TLS, no client certificates
  kMutualTls,      // TLS, a client certificate signed by --tls-client-ca required
};

struct Transport {
  std::shared_ptr<grpc::ServerCredentials> credentials;
  TransportMode mode = TransportMode::kPlainLoopback;
};

// "plaintext-loopback", "plaintext-remote", "tls", "mtls": the value of the `tls` key in ogived's log.
absl::string_view TransportModeName(TransportMode mode);

// Whether a listen address ("host:port") reaches this host only: 127.0.0.0/8, ::1 or localhost, or a
// unix: socket. Wildcards (0.0.0.0, [::], an empty host) and every other name are not loopback.
bool IsLoopbackAddress(absl::string_view listen_address);

// The credentials and mode for listening on `listen_address`. INVALID_ARGUMENT naming the flag and the
// path for: --tls-cert without --tls-key (or the reverse), --tls-client-ca without both, a file that
// cannot be read or holds no PEM certificate / key, a key that does not belong to the certificate,
// and a non-loopback address without TLS and without --allow-insecure-remote.
absl::StatusOr<Transport> ChooseTransport(absl::string_view listen_address, const TransportFlags& flags);

}  // namespace ogive::service

#endif  // OGIVE_SERVER_SERVICE_TRANSPORT_H_
