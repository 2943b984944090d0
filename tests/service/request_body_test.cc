// Request bodies that are not what the method takes, sent as raw bytes to a real ogived over
// loopback, to every method of ogive.v1.Ogive (the unary ones and the Watch stream): bytes that do
// not parse (garbage, a length that runs past the end, a field of the wrong wire type) get
// INVALID_ARGUMENT, reason INVALID_FIELD (field "request"), with a message naming the message type;
// a body over --max-message-bytes gets RESOURCE_EXHAUSTED, reason LIMIT_EXCEEDED, naming the flag;
// one past twice the limit is cut off by gRPC with its own RESOURCE_EXHAUSTED. Never UNIMPLEMENTED,
// never a bare INTERNAL, nothing stored, and the server keeps serving.
//
// The bytes are sent with gRPC's own blocking call helpers over ByteBuffer (what generated stubs
// call), so no client-side serialization stands between the test and the server.
#include <unistd.h>

#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "client/error_reason.h"
#include "client/ogive_client.h"
#include "gmock/gmock.h"
#include "grpcpp/grpcpp.h"
#include "grpcpp/impl/codegen/client_unary_call.h"
#include "grpcpp/impl/codegen/sync_stream.h"
#include "gtest/gtest.h"
#include "ogive/v1/service.grpc.pb.h"
#include "tests/support/ogived_process.h"
#include "tests/support/ogived_test_main.h"

namespace ogive {
namespace {

using ::testing::HasSubstr;

constexpr int kLimitBytes = 16 << 10;  // --max-message-bytes in these tests

struct Method {
  const char* name;     // "Ask"
  const char* request;  // "ogive.v1.AskRequest"
  bool streaming = false;
};

const std::vector<Method>& Methods() {
  static const auto* const kMethods = new std::vector<Method>{
      {"CreateCampaign", "ogive.v1.CreateCampaignRequest"},
      {"GetCampaign", "ogive.v1.GetCampaignRequest"},
      {"ListCampaigns", "ogive.v1.ListCampaignsRequest"},
      {"Ask", "ogive.v1.AskRequest"},
      {"Tell", "ogive.v1.TellRequest"},
      {"Renew", "ogive.v1.RenewRequest"},
      {"ListTrials", "ogive.v1.ListTrialsRequest"},
      {"ListGenerations", "ogive.v1.ListGenerationsRequest"},
      {"SetPhase", "ogive.v1.SetPhaseRequest"},
      {"Watch", "ogive.v1.WatchRequest", /*streaming=*/true},
  };
  return *kMethods;
}

// Bodies that are not a valid protocol buffers message of any type (protobuf wire format,
// protobuf.dev/programming-guides/encoding): each breaks one rule of the encoding.
struct Garbage {
  const char* what;
  std::string bytes;
};
std::vector<Garbage> Garbages() {
  return {
      {"bytes that are no tag", std::string("\xff\xff\xff\xff", 4)},
      {"a length past the end (field 1, length 5, two bytes)", std::string("\x0a\x05" "ab", 4)},
      {"a varint that never ends", std::string("\x08\x80\x80\x80", 4)},
      {"field number 0", std::string("\x00\x01", 2)},
      {"wire type 7 (none is defined)", std::string("\x0f\x01", 2)},
      {"an end-group tag with no start", std::string("\x0c", 1)},
  };
}

grpc::ByteBuffer Buffer(const std::string& bytes) {
  grpc::Slice slice(bytes);
  return grpc::ByteBuffer(&slice, 1);
}

class RequestBodyTest : public ::testing::Test {
 protected:
  void SetUp() override {
    testing::OgivedOptions options;
    options.binary = testing::OgivedBinary();
    options.db = absl::StrCat(::testing::TempDir(), "request_body_test_", getpid(), ".db");
    options.log_path = options.db + ".log";
    options.extra_flags = {"--max-message-bytes", absl::StrCat(kLimitBytes)};
    server_ = std::make_unique<testing::OgivedProcess>(options);
    ASSERT_TRUE(server_->Start().ok()) << server_->LogTail();
    grpc::ChannelArguments args;
    args.SetMaxSendMessageSize(-1);  // the test sends what the server must refuse
    channel_ = grpc::CreateCustomChannel(server_->target(), grpc::InsecureChannelCredentials(), args);
    client::ClientOptions client_options = server_->ClientOptions();
    client_options.max_attempts = 1;
    client_ = server_->NewClient(client_options);
  }
  void TearDown() override {
    server_->Kill(15);
    for (const char* suffix : {"", "-wal", "-shm", ".lock", ".log", ".admin.sock"}) {
      unlink((server_->options().db + suffix).c_str());
    }
  }

  // Calls `method` with `body` as its request's bytes; the call's status.
  grpc::Status Call(const Method& method, const std::string& body) {
    grpc::ClientContext context;
    context.set_deadline(std::chrono::system_clock::now() + std::chrono::seconds(10));
    const std::string path = absl::StrCat("/ogive.v1.Ogive/", method.name);
    const grpc::ByteBuffer request = Buffer(body);
    if (!method.streaming) {
      grpc::ByteBuffer response;
      return grpc::internal::BlockingUnaryCall<grpc::ByteBuffer, grpc::ByteBuffer>(
          channel_.get(), grpc::internal::RpcMethod(path.c_str(), grpc::internal::RpcMethod::NORMAL_RPC), &context,
          request, &response);
    }
    std::unique_ptr<grpc::ClientReader<grpc::ByteBuffer>> reader(
        grpc::internal::ClientReaderFactory<grpc::ByteBuffer>::Create(
            channel_.get(), grpc::internal::RpcMethod(path.c_str(), grpc::internal::RpcMethod::SERVER_STREAMING),
            &context, request));
    grpc::ByteBuffer view;
    while (reader->Read(&view)) {
    }
    return reader->Finish();
  }

  // The reason a refusal carries, as a client reads it.
  static std::optional<client::ErrorReason> ReasonOf(const grpc::Status& status) {
    return client::ErrorReasonOf(client::StatusFromGrpc(status));
  }

  std::unique_ptr<testing::OgivedProcess> server_;
  std::shared_ptr<grpc::Channel> channel_;
  std::unique_ptr<client::Client> client_;
};

TEST_F(RequestBodyTest, BytesThatDoNotParseAreInvalidArgumentNamingTheMessageOnEveryMethod) {
  for (const Method& method : Methods()) {
    for (const Garbage& garbage : Garbages()) {
      SCOPED_TRACE(absl::StrCat(method.name, ": ", garbage.what));
      const grpc::Status status = Call(method, garbage.bytes);
      EXPECT_EQ(status.error_code(), grpc::StatusCode::INVALID_ARGUMENT) << status.error_message();
      EXPECT_THAT(status.error_message(), HasSubstr(absl::StrCat("not a valid ", method.request)));
      std::optional<client::ErrorReason> why = ReasonOf(status);
      ASSERT_TRUE(why.has_value());
      EXPECT_EQ(why->reason, "INVALID_FIELD");
      EXPECT_EQ(why->metadata["field"], "request");
    }
  }
  // Nothing was created, and the server still serves a well-formed call.
  absl::StatusOr<v1::ListCampaignsResponse> campaigns = client_->ListCampaigns();
  ASSERT_TRUE(campaigns.ok()) << campaigns.status();
  EXPECT_EQ(campaigns->campaigns_size(), 0);
  // Each refusal is logged (the log is written by a thread of its own and flushed when ogived stops).
  ASSERT_EQ(server_->Kill(15), 0);
  const std::string log = server_->LogTail(2000);
  EXPECT_THAT(log, HasSubstr("event=bad_request method=Tell"));
  EXPECT_THAT(log, HasSubstr("event=bad_request method=Watch"));
}

TEST_F(RequestBodyTest, AnOversizedBodyNamesMaxMessageBytesAndOneTwiceAsLargeIsCutOffByGrpc) {
  for (const Method& method : Methods()) {
    SCOPED_TRACE(method.name);
    // Field 15 of every request is unknown (no request has that many fields), so the body parses
    // and only its size is wrong: a length-delimited field of kLimitBytes bytes.
    std::string body = "\x7a";  // field 15, wire type 2
    int length = kLimitBytes;
    do {  // the length as a varint
      body.push_back(static_cast<char>((length & 0x7f) | (length > 0x7f ? 0x80 : 0)));
      length >>= 7;
    } while (length > 0);
    body.append(kLimitBytes, 'x');
    grpc::Status status = Call(method, body);
    EXPECT_EQ(status.error_code(), grpc::StatusCode::RESOURCE_EXHAUSTED) << status.error_message();
    EXPECT_THAT(status.error_message(), HasSubstr("--max-message-bytes"));
    EXPECT_THAT(status.error_message(), HasSubstr(absl::StrCat(kLimitBytes)));
    std::optional<client::ErrorReason> why = ReasonOf(status);
    ASSERT_TRUE(why.has_value());
    EXPECT_EQ(why->reason, "LIMIT_EXCEEDED");
    EXPECT_EQ(why->metadata["limit"], "max_message_bytes");

    status = Call(method, std::string(2 * kLimitBytes + 1, 'x'));
    EXPECT_EQ(status.error_code(), grpc::StatusCode::RESOURCE_EXHAUSTED) << status.error_message();
  }
  // The server still serves, and a body just under the limit is read like any other.
  std::string under = "\x7a\x80\x7e";  // field 15, length 16128 (varint 0x80 0x7e)
  under.append(16128, 'x');
  ASSERT_LT(under.size(), static_cast<size_t>(kLimitBytes));
  const grpc::Status status = Call(Methods()[2], under);  // ListCampaigns, whose unknown field is ignored
  EXPECT_TRUE(status.ok()) << status.error_code() << " " << status.error_message();
}

}  // namespace
}  // namespace ogive
