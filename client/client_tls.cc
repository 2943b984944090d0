#include "client/client_tls.h"

#include <cerrno>
#include <cstring>
#include <fstream>
#include <sstream>

#include "absl/strings/ascii.h"
#include "absl/strings/str_cat.h"

namespace ogive::client {
namespace {

// Reads a PEM file that must hold a block whose header contains `kind` ("CERTIFICATE", "PRIVATE KEY").
// Only the framing is checked here; gRPC's TLS library parses the contents.
absl::StatusOr<std::string> ReadPem(const char* option, const std::string& path, const char* kind) {
  std::ifstream in(path, std::ios::binary);
  if (!in) {
    return absl::InvalidArgumentError(absl::StrCat(option, " '", path, "': cannot read: ", std::strerror(errno)));
  }
  std::ostringstream bytes;
  bytes << in.rdbuf();
  std::string pem = bytes.str();
  const size_t begin = pem.find("-----BEGIN ");
  if (begin == std::string::npos || pem.find(kind, begin) == std::string::npos) {
    return absl::InvalidArgumentError(
        absl::StrCat(option, " '", path, "': holds no PEM ", absl::AsciiStrToLower(kind), " (-----BEGIN ... ", kind,
                     "-----)"));
  }
  return pem;
}

}  // namespace

absl::StatusOr<std::shared_ptr<grpc::ChannelCredentials>> TlsChannelCredentials(const ClientTls& tls) {
  if (tls.cert_path.empty() != tls.key_path.empty()) {
    return absl::InvalidArgumentError(tls.key_path.empty()
                                          ? "--tls-cert: needs --tls-key, the certificate's private key"
                                          : "--tls-key: needs --tls-cert, the certificate it belongs to");
  }
  grpc::SslCredentialsOptions options;
  if (!tls.ca_path.empty()) {
    absl::StatusOr<std::string> ca = ReadPem("--tls-ca", tls.ca_path, "CERTIFICATE");
    if (!ca.ok()) return ca.status();
    options.pem_root_certs = *std::move(ca);
  }
  if (!tls.cert_path.empty()) {
    absl::StatusOr<std::string> cert = ReadPem("--tls-cert", tls.cert_path, "CERTIFICATE");
    if (!cert.ok()) return cert.status();
    absl::StatusOr<std::string> key = ReadPem("--tls-key", tls.key_path, "PRIVATE KEY");
    if (!key.ok()) return key.status();
    options.pem_cert_chain = *std::move(cert);
    options.pem_private_key = *std::move(key);
  }
  return grpc::SslCredentials(options);
}

}  // namespace ogive::client
