// How ogived picks its transport (server/service/transport.h) without certificate files: which listen
// addresses are loopback, and the refusals that need no file. The file checks (unreadable, not PEM, a
// key of another certificate) and the handshakes are in tls_test.sh, with certificates made by the
// openssl command line.
#include "server/service/transport.h"

#include <string>

#include "gmock/gmock.h"
#include "gtest/gtest.h"

namespace ogive::service {
namespace {

using ::testing::HasSubstr;

TEST(IsLoopbackAddressTest, LoopbackHostsOnly) {
  for (const char* address : {"127.0.0.1:7075", "127.1.2.3:1", "localhost:7075", "LocalHost:80", "[::1]:7075",
                              "[::ffff:127.0.0.1]:7075", "unix:/run/ogive.sock", "unix-abstract:ogive"}) {
    EXPECT_TRUE(IsLoopbackAddress(address)) << address;
  }
  for (const char* address : {"0.0.0.0:7075", "[::]:7075", ":7075", "10.0.0.5:7075", "128.0.0.1:7075",
                              "127.example.com:7075", "localhost.example.com:7075", "ogive.lab:7075",
                              "[::2]:7075", "[::1:7075", "[::ffff:10.0.0.1]:7075", "1270.0.0.1:7075"}) {
    EXPECT_FALSE(IsLoopbackAddress(address)) << address;
  }
}

TEST(ChooseTransportTest, PlainTextOnLoopbackOnlyUnlessAllowed) {
  absl::StatusOr<Transport> loopback = ChooseTransport("127.0.0.1:7075", TransportFlags{});
  ASSERT_TRUE(loopback.ok()) << loopback.status();
  EXPECT_EQ(loopback->mode, TransportMode::kPlainLoopback);
  EXPECT_NE(loopback->credentials, nullptr);
  EXPECT_EQ(TransportModeName(loopback->mode), "plaintext-loopback");

  absl::StatusOr<Transport> remote = ChooseTransport("0.0.0.0:7075", TransportFlags{});
  EXPECT_EQ(remote.status().code(), absl::StatusCode::kInvalidArgument);
  EXPECT_THAT(std::string(remote.status().message()),
              HasSubstr("--listen 0.0.0.0:7075: without TLS ogived listens on loopback only"));
  EXPECT_THAT(std::string(remote.status().message()), HasSubstr("--allow-insecure-remote"));

  TransportFlags allowed;
  allowed.allow_insecure_remote = true;
  absl::StatusOr<Transport> insecure = ChooseTransport("0.0.0.0:7075", allowed);
  ASSERT_TRUE(insecure.ok()) << insecure.status();
  EXPECT_EQ(insecure->mode, TransportMode::kPlainRemote);
}

TEST(ChooseTransportTest, TlsFlagsComeTogether) {
  TransportFlags cert_only;
  cert_only.tls_cert_path = "/nonexistent/cert.pem";
  EXPECT_THAT(std::string(ChooseTransport("127.0.0.1:1", cert_only).status().message()),
              HasSubstr("--tls-cert: needs --tls-key"));
  TransportFlags key_only;
  key_only.tls_key_path = "/nonexistent/key.pem";
  EXPECT_THAT(std::string(ChooseTransport("127.0.0.1:1", key_only).status().message()),
              HasSubstr("--tls-key: needs --tls-cert"));
  TransportFlags ca_only;
  ca_only.tls_client_ca_path = "/nonexistent/ca.pem";
  EXPECT_THAT(std::string(ChooseTransport("127.0.0.1:1", ca_only).status().message()),
              HasSubstr("--tls-client-ca: client certificates need TLS"));
  TransportFlags missing;
  missing.tls_cert_path = "/nonexistent/cert.pem";
  missing.tls_key_path = "/nonexistent/key.pem";
  EXPECT_THAT(std::string(ChooseTransport("0.0.0.0:1", missing).status().message()),
              HasSubstr("--tls-cert '/nonexistent/cert.pem': cannot read"));
}

}  // namespace
}  // namespace ogive::service
