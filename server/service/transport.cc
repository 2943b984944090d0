#include "server/service/transport.h"

#include <arpa/inet.h>
#include <openssl/bio.h>
#include <openssl/err.h>
#include <openssl/evp.h>
#include <openssl/pem.h>
#include <openssl/x509.h>

#include <cerrno>
#include <cstring>
#include <fstream>
#include <sstream>

#include "absl/strings/ascii.h"
#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "grpcpp/security/server_credentials.h"

namespace ogive::service {
namespace {

// "--tls-key '/etc/ogive/key.pem'": how errors name a file.
std::string Named(absl::string_view flag, const std::string& path) { return absl::StrCat(flag, " '", path, "'"); }

absl::StatusOr<std::string> ReadFile(absl::string_view flag, const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in) {
    return absl::InvalidArgumentError(absl::StrCat(Named(flag, path), ": cannot read: ", std::strerror(errno)));
  }
  std::ostringstream bytes;
  bytes << in.rdbuf();
  if (in.bad()) return absl::InvalidArgumentError(absl::StrCat(Named(flag, path), ": cannot read"));
  return bytes.str();
}

// OpenSSL's own reason for the last failure, for the end of a message; clears its error queue.
std::string OpenSslReason() {
  const unsigned long code = ERR_get_error();
  ERR_clear_error();
  if (code == 0) return "";
  char text[256];
  ERR_error_string_n(code, text, sizeof text);
  return absl::StrCat(" (", text, ")");
}

struct BioFree {
  void operator()(BIO* b) const { BIO_free(b); }
};
struct X509Free {
  void operator()(X509* x) const { X509_free(x); }
};
struct KeyFree {
  void operator()(EVP_PKEY* k) const { EVP_PKEY_free(k); }
};
using Bio = std::unique_ptr<BIO, BioFree>;
using Cert = std::unique_ptr<X509, X509Free>;
using Key = std::unique_ptr<EVP_PKEY, KeyFree>;

Bio MemoryBio(const std::string& pem) { return Bio(BIO_new_mem_buf(pem.data(), static_cast<int>(pem.size()))); }

// The first certificate of a PEM file, and how many there are.
absl::StatusOr<Cert> FirstCertificate(absl::string_view flag, const std::string& path, const std::string& pem,
                                      int* count) {
  Bio bio = MemoryBio(pem);
  Cert first;
  *count = 0;
  while (Cert cert{PEM_read_bio_X509(bio.get(), nullptr, nullptr, nullptr)}) {
    if (first == nullptr) first = std::move(cert);
    ++*count;
  }
  ERR_clear_error();  // the read that ended the loop failed at the end of the file
  if (first == nullptr) {
    return absl::InvalidArgumentError(
        absl::StrCat(Named(flag, path), ": holds no PEM certificate (-----BEGIN CERTIFICATE-----)"));
  }
  return first;
}

}  // namespace

absl::string_view TransportModeName(TransportMode mode) {
  switch (mode) {
    case TransportMode::kPlainLoopback:
      return "plaintext-loopback";
    case TransportMode::kPlainRemote:
      return "plaintext-remote";
    case TransportMode::kTls:
      return "tls";
    case TransportMode::kMutualTls:
      return "mtls";
  }
  return "unknown";
}

bool IsLoopbackAddress(absl::string_view address) {
  if (absl::StartsWith(address, "unix:") || absl::StartsWith(address, "unix-abstract:")) return true;
  std::string host;
  if (absl::StartsWith(address, "[")) {
    const size_t close = address.find(']');
    if (close == absl::string_view::npos) return false;
    host = std::string(address.substr(1, close - 1));
  } else {
    const size_t colon = address.rfind(':');
    host = std::string(address.substr(0, colon));
  }
  if (absl::AsciiStrToLower(host) == "localhost") return true;
  unsigned char bytes[16];
  if (inet_pton(AF_INET, host.c_str(), bytes) == 1) return bytes[0] == 127;
  if (inet_pton(AF_INET6, host.c_str(), bytes) == 1) {
    static const unsigned char kLoopback6[16] = {0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 1};
    static const unsigned char kMapped4[12] = {0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0xff, 0xff};
    return std::memcmp(bytes, kLoopback6, 16) == 0 || (std::memcmp(bytes, kMapped4, 12) == 0 && bytes[12] == 127);
  }
  return false;
}

absl::StatusOr<Transport> ChooseTransport(absl::string_view listen_address, const TransportFlags& flags) {
  const bool has_cert = !flags.tls_cert_path.empty();
  const bool has_key = !flags.tls_key_path.empty();
  if (has_cert != has_key) {
    return absl::InvalidArgumentError(has_cert ? "--tls-cert: needs --tls-key, the certificate's private key"
                                               : "--tls-key: needs --tls-cert, the certificate it belongs to");
  }
  if (!has_cert) {
    if (!flags.tls_client_ca_path.empty()) {
      return absl::InvalidArgumentError(
          "--tls-client-ca: client certificates need TLS; give --tls-cert and --tls-key too");
    }
    Transport plain{grpc::InsecureServerCredentials(), TransportMode::kPlainLoopback};
    if (IsLoopbackAddress(listen_address)) return plain;
    if (!flags.allow_insecure_remote) {
      return absl::InvalidArgumentError(absl::StrCat(
          "--listen ", listen_address,
          ": without TLS ogived listens on loopback only (127.0.0.1, [::1], localhost); give --tls-cert and "
          "--tls-key, or pass --allow-insecure-remote to serve other hosts in plain text"));
    }
    plain.mode = TransportMode::kPlainRemote;
    return plain;
  }

  absl::StatusOr<std::string> cert_pem = ReadFile("--tls-cert", flags.tls_cert_path);
  if (!cert_pem.ok()) return cert_pem.status();
  absl::StatusOr<std::string> key_pem = ReadFile("--tls-key", flags.tls_key_path);
  if (!key_pem.ok()) return key_pem.status();
  int chain_length = 0;
  absl::StatusOr<Cert> cert = FirstCertificate("--tls-cert", flags.tls_cert_path, *cert_pem, &chain_length);
  if (!cert.ok()) return cert.status();
  Key key{PEM_read_bio_PrivateKey(MemoryBio(*key_pem).get(), nullptr, nullptr, nullptr)};
  if (key == nullptr) {
    return absl::InvalidArgumentError(absl::StrCat(Named("--tls-key", flags.tls_key_path),
                                                   ": holds no unencrypted PEM private key", OpenSslReason()));
  }
  if (X509_check_private_key(cert->get(), key.get()) != 1) {
    ERR_clear_error();
    return absl::InvalidArgumentError(absl::StrCat(Named("--tls-key", flags.tls_key_path),
                                                   ": is not the private key of the certificate in ",
                                                   Named("--tls-cert", flags.tls_cert_path)));
  }

  grpc::SslServerCredentialsOptions options(GRPC_SSL_DONT_REQUEST_CLIENT_CERTIFICATE);
  options.pem_key_cert_pairs.push_back({*key_pem, *cert_pem});
  TransportMode mode = TransportMode::kTls;
  if (!flags.tls_client_ca_path.empty()) {
    absl::StatusOr<std::string> ca_pem = ReadFile("--tls-client-ca", flags.tls_client_ca_path);
    if (!ca_pem.ok()) return ca_pem.status();
    int ca_count = 0;
    if (absl::StatusOr<Cert> ca = FirstCertificate("--tls-client-ca", flags.tls_client_ca_path, *ca_pem, &ca_count);
        !ca.ok()) {
      return ca.status();
    }
    options.pem_root_certs = *ca_pem;
    options.client_certificate_request = GRPC_SSL_REQUEST_AND_REQUIRE_CLIENT_CERTIFICATE_AND_VERIFY;
    mode = TransportMode::kMutualTls;
  }
  return Transport{grpc::SslServerCredentials(options), mode};
}

}  // namespace ogive::service
