// Tests of LeaseRenewer's stop and of Cancellation, against a server that accepts TCP connections
// and never answers (a host that hangs: the listening socket's backlog takes the connection, nothing
// reads it). A renewal then waits for its deadline; stopping the renewer must not.
#include <arpa/inet.h>
#include <netinet/in.h>
#include <sys/socket.h>
#include <unistd.h>

#include <chrono>
#include <memory>
#include <string>
#include <thread>

#include "absl/strings/str_cat.h"
#include "absl/time/clock.h"
#include "client/ogive_client.h"
#include "gtest/gtest.h"

namespace ogive::client {
namespace {

// A loopback listener that never accepts: connections complete in the kernel and then hang.
class SilentServer {
 public:
  SilentServer() {
    fd_ = socket(AF_INET, SOCK_STREAM, 0);
    sockaddr_in address{};
    address.sin_family = AF_INET;
    address.sin_addr.s_addr = htonl(INADDR_LOOPBACK);
    socklen_t length = sizeof address;
    if (fd_ >= 0 && bind(fd_, reinterpret_cast<sockaddr*>(&address), sizeof address) == 0 && listen(fd_, 16) == 0 &&
        getsockname(fd_, reinterpret_cast<sockaddr*>(&address), &length) == 0) {
      port_ = ntohs(address.sin_port);
    }
  }
  ~SilentServer() {
    if (fd_ >= 0) close(fd_);
  }
  std::string target() const { return absl::StrCat("127.0.0.1:", port_); }
  bool ok() const { return port_ != 0; }

 private:
  int fd_ = -1;
  int port_ = 0;
};

ClientOptions LongDeadline() {
  ClientOptions options;
  options.call_timeout = absl::Seconds(20);  // a renewal left alone waits this long
  options.max_attempts = 3;
  return options;
}

TEST(LeaseRenewerTest, StoppingDoesNotWaitForARenewalTheServerNeverAnswers) {
  SilentServer server;
  ASSERT_TRUE(server.ok());
  std::unique_ptr<Client> client = Client::Connect(server.target(), LongDeadline());
  ASSERT_NE(client, nullptr);
  auto renewer = std::make_unique<LeaseRenewer>(client.get(), "kiln-glaze", std::vector<int64_t>{7}, "bench-3",
                                                60.0, absl::Milliseconds(10));
  std::this_thread::sleep_for(std::chrono::milliseconds(300));  // a renewal is now waiting on the server
  const absl::Time stopping = absl::Now();
  renewer.reset();
  // Bounded: without cancellation the destructor waits out the 20 s deadline.
  EXPECT_LT(absl::Now() - stopping, absl::Seconds(3));
}

TEST(CancellationTest, ACancelledCallReturnsCancelledAndIsNotRetried) {
  SilentServer server;
  ASSERT_TRUE(server.ok());
  std::unique_ptr<Client> client = Client::Connect(server.target(), LongDeadline());
  ASSERT_NE(client, nullptr);
  Cancellation cancellation;
  absl::Status renewed;
  std::thread caller([&] { renewed = client->Renew("kiln-glaze", {7}, "bench-3", 60.0, &cancellation).status(); });
  std::this_thread::sleep_for(std::chrono::milliseconds(300));
  const absl::Time cancelling = absl::Now();
  cancellation.Cancel();
  caller.join();
  EXPECT_LT(absl::Now() - cancelling, absl::Seconds(3));
  EXPECT_EQ(renewed.code(), absl::StatusCode::kCancelled) << renewed;
  EXPECT_TRUE(cancellation.cancelled());
  // Cancelled for good: a later call with it does not reach the network.
  EXPECT_EQ(client->Renew("kiln-glaze", {7}, "bench-3", 60.0, &cancellation).status().code(),
            absl::StatusCode::kCancelled);
}

}  // namespace
}  // namespace ogive::client
