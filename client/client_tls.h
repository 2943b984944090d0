// ClientTls: how a client secures its channel to ogived. Off by default (plain text, for a server on
// loopback); on when asked for or when any file is named. Files are PEM and are read when the channel
// is made, so a missing file is an error naming its option, not a failed handshake later.
//
// Plain values; the caller owns nothing beyond the returned credentials.
#ifndef OGIVE_CLIENT_CLIENT_TLS_H_
#define OGIVE_CLIENT_CLIENT_TLS_H_

#include <memory>
#include <string>

#include "absl/status/statusor.h"
#include "grpcpp/security/credentials.h"

namespace ogive::client {

struct ClientTls {
  bool enabled = false;      // TLS even without files: trust the system's roots
  std::string ca_path;       // PEM CA certificates that sign the server's certificate (else the system's)
  std::string cert_path;     // PEM client certificate chain, for a server that requires one; with key_path
  std::string key_path;      // PEM private key of cert_path
  std::string server_name;   // the name the server's certificate must carry; default the target's host

  bool on() const { return enabled || !ca_path.empty() || !cert_path.empty() || !key_path.empty(); }
};

// TLS channel credentials from `tls` (REQUIRES: tls.on()). INVALID_ARGUMENT naming the option
// (--tls-ca, --tls-cert, --tls-key) and the path for a file that cannot be read or holds no PEM block
// of the right kind, and for a certificate without a key or a key without a certificate.
absl::StatusOr<std::shared_ptr<grpc::ChannelCredentials>> TlsChannelCredentials(const ClientTls& tls);

}  // namespace ogive::client

#endif  // OGIVE_CLIENT_CLIENT_TLS_H_
