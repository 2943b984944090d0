// Access control over the wire: a real in-process gRPC server on a loopback port (OgiveService over
// a Registry over a SqliteStore on a temporary file, with an Authorizer that requires tokens, and
// tokens made by TokenAdmin as `ogived token create` makes them), driven through the generated stub
// with hand-set `authorization` metadata and through ogive::client::Client. The Authorizer runs on
// a hand-driven clock (revocation refreshes and the rate limit are tested without sleeping); the
// campaign engine on the real one.
//
// Covers: every role against every method (allowed calls succeed, refused ones get
// PERMISSION_DENIED and store nothing), missing, malformed and unknown tokens (UNAUTHENTICATED),
// the health service without a token, campaign-limited tokens (ListCampaigns filtered, other campaigns
// refused whether they exist or not), revocation in force without a restart (for new calls and an
// open Watch), the audit labels stored with reports and phase changes (kept across a restart), and
// the per-token rate limit.
#include <unistd.h>

#include <atomic>
#include <chrono>
#include <cstdio>
#include <map>
#include <memory>
#include <optional>
#include <string>
#include <thread>
#include <vector>

#include "absl/strings/str_cat.h"
#include "absl/time/clock.h"
#include "absl/time/time.h"
#include "client/error_reason.h"
#include "client/ogive_client.h"
#include "gmock/gmock.h"
#include "grpc/health/v1/health.grpc.pb.h"
#include "grpcpp/grpcpp.h"
#include "grpcpp/health_check_service_interface.h"
#include "gtest/gtest.h"
#include "ogive/v1/service.grpc.pb.h"
#include "server/service/authorizer.h"
#include "server/service/grpc_service.h"
#include "server/service/registry.h"
#include "server/service/token_admin.h"
#include "storage/sqlite_store.h"

namespace ogive {
namespace {

using ::testing::_;
using ::testing::AllOf;
using ::testing::ElementsAre;
using ::testing::HasSubstr;

constexpr auto kCallTimeout = std::chrono::seconds(10);
const absl::Time kAuthStart = absl::FromUnixSeconds(1800000000);

MATCHER_P2(GrpcStatusIs, code, message_matcher, "") {
  *result_listener << "status is " << arg.error_code() << ": " << arg.error_message();
  return arg.error_code() == code &&
         ::testing::ExplainMatchResult(message_matcher, arg.error_message(), result_listener);
}

// One ogived with tokens required, in this process.
class AuthServer {
 public:
  explicit AuthServer(std::string db_path) : db_path_(std::move(db_path)) {}
  ~AuthServer() { Stop(); }

  void Start(service::AuthOptions options = {}) {
    absl::StatusOr<std::unique_ptr<storage::SqliteStore>> store = storage::SqliteStore::Open(db_path_);
    ASSERT_TRUE(store.ok()) << store.status();
    store_ = *std::move(store);
    registry_ = std::make_unique<service::Registry>(store_.get(), service::ServiceLimits());
    ASSERT_TRUE(registry_->LoadAll().ok());
    absl::StatusOr<std::unique_ptr<service::Authorizer>> authorizer =
        service::Authorizer::Create(store_.get(), options, [this] { return now(); });
    ASSERT_TRUE(authorizer.ok()) << authorizer.status();
    authorizer_ = *std::move(authorizer);
    // As in ogived: a token written through the server is in force at once.
    admin_ = std::make_unique<service::TokenAdmin>(store_.get(), [this] { return now(); },
                                                   [this] { ASSERT_TRUE(authorizer_->Reload().ok()); });
    service_ = std::make_unique<service::OgiveService>(registry_.get(), authorizer_.get(), [this] { return now(); });
    grpc::EnableDefaultHealthCheckService(true);
    grpc::ServerBuilder builder;
    port_ = 0;
    builder.AddListeningPort("127.0.0.1:0", grpc::InsecureServerCredentials(), &port_);
    builder.RegisterService(service_.get());
    server_ = builder.BuildAndStart();
    ASSERT_NE(server_, nullptr);
    ASSERT_NE(port_, 0);
    channel_ = grpc::CreateChannel(target(), grpc::InsecureChannelCredentials());
    stub_ = v1::Ogive::NewStub(channel_);
  }

  void Stop() {
    if (service_ != nullptr) service_->StopWatches();
    if (server_ != nullptr) {
      server_->Shutdown(std::chrono::system_clock::now() + std::chrono::seconds(5));
      server_->Wait();
    }
    stub_.reset();
    channel_.reset();
    server_.reset();
    service_.reset();
    admin_.reset();
    authorizer_.reset();
    registry_.reset();
    store_.reset();
  }

  // A new token's `authorization` value, as `ogived token create` would print the token.
  std::string MakeToken(const std::string& label, const std::string& role, std::vector<std::string> campaigns = {}) {
    v1::CreateTokenRequest request;
    request.set_label(label);
    request.set_role(role);
    for (const std::string& s : campaigns) request.add_campaigns(s);
    absl::StatusOr<v1::CreateTokenResponse> created = admin_->Create(request);
    EXPECT_TRUE(created.ok()) << created.status();
    return created.ok() ? "Bearer " + created->secret() : "";
  }
  void Revoke(const std::string& label) {
    v1::RevokeTokenRequest request;
    request.set_label(label);
    absl::StatusOr<v1::RevokeTokenResponse> revoked = admin_->Revoke(request);
    ASSERT_TRUE(revoked.ok()) << revoked.status();
  }

  absl::Time now() const { return absl::FromUnixNanos(now_ns_.load()); }
  void Advance(absl::Duration d) { now_ns_ += absl::ToInt64Nanoseconds(d); }

  std::string target() const { return absl::StrCat("127.0.0.1:", port_); }
  v1::Ogive::Stub& stub() { return *stub_; }
  std::shared_ptr<grpc::Channel> channel() { return channel_; }
  storage::SqliteStore& store() { return *store_; }

 private:
  const std::string db_path_;
  std::atomic<int64_t> now_ns_{absl::ToUnixNanos(kAuthStart)};
  int port_ = 0;
  std::unique_ptr<storage::SqliteStore> store_;
  std::unique_ptr<service::Registry> registry_;
  std::unique_ptr<service::Authorizer> authorizer_;
  std::unique_ptr<service::TokenAdmin> admin_;
  std::unique_ptr<service::OgiveService> service_;
  std::unique_ptr<grpc::Server> server_;
  std::shared_ptr<grpc::Channel> channel_;
  std::unique_ptr<v1::Ogive::Stub> stub_;
};

void Prepare(grpc::ClientContext& context, const std::string& authorization) {
  context.set_deadline(std::chrono::system_clock::now() + kCallTimeout);
  if (!authorization.empty()) context.AddMetadata("authorization", authorization);
}

v1::CampaignDesign Design(const std::string& name) {
  v1::CampaignDesign d;
  d.set_name(name);
  v1::Parameter* p = d.add_parameters();
  p->set_name("temp");
  p->mutable_real()->set_low(0);
  p->mutable_real()->set_high(1);
  d.mutable_objective()->set_direction(v1::DIRECTION_LOWER_IS_BETTER);
  d.set_seed(3);
  d.set_lease_seconds(600);
  d.set_population_size(4);
  return d;
}

enum class Call { kCreateCampaign, kGetCampaign, kListCampaigns, kAsk, kTell, kRenew, kListTrials, kSetPhase, kWatch };

const char* CallName(Call c) {
  static const char* const kNames[] = {"CreateCampaign", "GetCampaign",   "ListCampaigns", "Ask",  "Tell",
                                       "Renew",       "ListTrials", "SetPhase",    "Watch"};
  return kNames[static_cast<int>(c)];
}

// What a test needs to make each call valid.
struct Fixture {
  std::string campaign = "alpha";
  int64_t tell_trial = 0;   // leased, to be reported
  int64_t renew_trial = 0;  // leased to worker "w"
};

// Makes one valid call of `call` with `authorization` and returns its status (for Watch: OK once the
// first view arrived).
grpc::Status MakeCall(AuthServer& server, Call call, const std::string& authorization, Fixture& f,
                      const std::string& label) {
  grpc::ClientContext context;
  Prepare(context, authorization);
  v1::Ogive::Stub& stub = server.stub();
  switch (call) {
    case Call::kCreateCampaign: {
      v1::CreateCampaignRequest request;
      *request.mutable_design() = Design(absl::StrCat("made-by-", label));
      v1::CampaignView response;
      return stub.CreateCampaign(&context, request, &response);
    }
    case Call::kGetCampaign: {
      v1::GetCampaignRequest request;
      request.set_campaign(f.campaign);
      v1::CampaignView response;
      return stub.GetCampaign(&context, request, &response);
    }
    case Call::kListCampaigns: {
      v1::ListCampaignsResponse response;
      return stub.ListCampaigns(&context, v1::ListCampaignsRequest(), &response);
    }
    case Call::kAsk: {
      v1::AskRequest request;
      request.set_campaign(f.campaign);
      request.set_count(1);
      request.set_worker("w");
      v1::AskResponse response;
      return stub.Ask(&context, request, &response);
    }
    case Call::kTell: {
      v1::TellRequest request;
      request.set_campaign(f.campaign);
      request.set_worker("w");
      v1::Report* report = request.add_reports();
      report->set_trial(f.tell_trial);
      report->mutable_outcome()->set_score(0.5);
      v1::TellResponse response;
      grpc::Status status = stub.Tell(&context, request, &response);
      if (status.ok()) {
        EXPECT_EQ(response.results(0).code(), 0) << response.results(0).message();
      }
      return status;
    }
    case Call::kRenew: {
      v1::RenewRequest request;
      request.set_campaign(f.campaign);
      request.add_trials(f.renew_trial);
      request.set_worker("w");
      v1::RenewResponse response;
      return stub.Renew(&context, request, &response);
    }
    case Call::kListTrials: {
      v1::ListTrialsRequest request;
      request.set_campaign(f.campaign);
      v1::ListTrialsResponse response;
      return stub.ListTrials(&context, request, &response);
    }
    case Call::kSetPhase: {
      v1::SetPhaseRequest request;
      request.set_campaign(f.campaign);
      request.set_command(v1::PHASE_COMMAND_RESUME);  // the campaign is open: allowed, changes nothing
      v1::CampaignView response;
      return stub.SetPhase(&context, request, &response);
    }
    case Call::kWatch: {
      v1::WatchRequest request;
      request.set_campaign(f.campaign);
      std::unique_ptr<grpc::ClientReader<v1::CampaignView>> reader = stub.Watch(&context, request);
      v1::CampaignView view;
      if (reader->Read(&view)) {
        context.TryCancel();
        (void)reader->Finish();
        return grpc::Status::OK;
      }
      return reader->Finish();
    }
  }
  return grpc::Status(grpc::StatusCode::INTERNAL, "unknown call");
}

class AuthTest : public ::testing::Test {
 protected:
  void SetUp() override {
    path_ = absl::StrCat(::testing::TempDir(), "ogive_auth_test_", getpid(), "_", ++test_number_, ".db");
    Remove();
    server_ = std::make_unique<AuthServer>(path_);
  }
  void TearDown() override {
    server_.reset();
    Remove();
  }
  void Remove() {
    for (const char* suffix : {"", "-wal", "-shm", ".lock"}) std::remove(absl::StrCat(path_, suffix).c_str());
  }

  // A client of the library with `token` (without the "Bearer " of an authorization value).
  std::unique_ptr<client::Client> ClientWith(const std::string& authorization) {
    client::ClientOptions options;
    options.call_timeout = absl::Seconds(10);
    options.max_attempts = 1;
    options.token = authorization.substr(std::string("Bearer ").size());
    return client::Client::Connect(server_->target(), options);
  }

  static inline int test_number_ = 0;
  std::string path_;
  std::unique_ptr<AuthServer> server_;
};

TEST_F(AuthTest, EachRoleCallsExactlyItsMethods) {
  server_->Start();
  const std::map<std::string, std::string> tokens = {{"reader", server_->MakeToken("viewer", "reader")},
                                                     {"worker", server_->MakeToken("farm", "worker")},
                                                     {"admin", server_->MakeToken("alice", "admin")}};
  std::unique_ptr<client::Client> admin = ClientWith(tokens.at("admin"));
  ASSERT_TRUE(admin->CreateCampaign(Design("alpha")).ok());
  absl::StatusOr<v1::AskResponse> asked = admin->Ask("alpha", 2, "w");
  ASSERT_TRUE(asked.ok()) << asked.status();
  Fixture f;
  f.tell_trial = asked->trials(0).number();
  f.renew_trial = asked->trials(1).number();

  // The table, written out: reader reads; worker also asks, tells and renews; admin also
  // creates campaigns and changes phases. Readers and workers try first, so a refused Tell would have
  // been the first to report the trial.
  const std::map<std::string, std::vector<Call>> allowed = {
      {"reader", {Call::kGetCampaign, Call::kListCampaigns, Call::kListTrials, Call::kWatch}},
      {"worker", {Call::kGetCampaign, Call::kListCampaigns, Call::kListTrials, Call::kWatch, Call::kAsk, Call::kTell,
                  Call::kRenew}},
      {"admin", {Call::kGetCampaign, Call::kListCampaigns, Call::kListTrials, Call::kWatch, Call::kAsk, Call::kTell,
                 Call::kRenew, Call::kCreateCampaign, Call::kSetPhase}}};
  const std::map<std::string, std::string> labels = {{"reader", "viewer"}, {"worker", "farm"}, {"admin", "alice"}};
  for (const std::string role : {"reader", "worker", "admin"}) {
    for (int c = 0; c <= static_cast<int>(Call::kWatch); ++c) {
      const Call call = static_cast<Call>(c);
      const std::vector<Call>& mine = allowed.at(role);
      const bool may = std::find(mine.begin(), mine.end(), call) != mine.end();
      const grpc::Status status = MakeCall(*server_, call, tokens.at(role), f, labels.at(role));
      if (may) {
        EXPECT_TRUE(status.ok()) << role << " " << CallName(call) << ": " << status.error_message();
      } else {
        EXPECT_THAT(status, GrpcStatusIs(grpc::StatusCode::PERMISSION_DENIED,
                                         AllOf(HasSubstr(absl::StrCat(CallName(call), " needs role")),
                                               HasSubstr(absl::StrCat("has role ", role)))))
            << role << " " << CallName(call);
      }
    }
  }
  // Refused calls stored nothing: the reader made no campaign and told nothing; the trial was reported
  // by the worker, the first role allowed to.
  absl::StatusOr<v1::ListCampaignsResponse> campaigns = admin->ListCampaigns();
  ASSERT_TRUE(campaigns.ok());
  std::vector<std::string> names;
  for (const v1::CampaignView& v : campaigns->campaigns()) names.push_back(v.name());
  EXPECT_THAT(names, ElementsAre("alpha", "made-by-alice"));
  absl::StatusOr<std::vector<v1::Trial>> trials = admin->ListAllTrials("alpha");
  ASSERT_TRUE(trials.ok());
  EXPECT_EQ((*trials)[f.tell_trial - 1].reported_by(), "farm");
}

TEST_F(AuthTest, MissingMalformedAndUnknownTokensAreUnauthenticated) {
  server_->Start();
  const std::string admin_token = server_->MakeToken("alice", "admin");
  ASSERT_TRUE(ClientWith(admin_token)->CreateCampaign(Design("alpha")).ok());
  Fixture f;
  EXPECT_THAT(MakeCall(*server_, Call::kGetCampaign, "", f, ""),
              GrpcStatusIs(grpc::StatusCode::UNAUTHENTICATED,
                           AllOf(HasSubstr("GetCampaign needs a token"), HasSubstr("authorization: Bearer"))));
  EXPECT_THAT(MakeCall(*server_, Call::kWatch, "", f, ""), GrpcStatusIs(grpc::StatusCode::UNAUTHENTICATED, _));
  EXPECT_THAT(MakeCall(*server_, Call::kAsk, "Basic QWxhZGRpbjpvcGVuIHNlc2FtZQ==", f, ""),
              GrpcStatusIs(grpc::StatusCode::UNAUTHENTICATED, HasSubstr("expected 'Bearer <token>' (RFC 6750)")));
  EXPECT_THAT(MakeCall(*server_, Call::kAsk, admin_token.substr(7), f, ""),  // the token without a scheme
              GrpcStatusIs(grpc::StatusCode::UNAUTHENTICATED, HasSubstr("expected 'Bearer <token>'")));
  EXPECT_THAT(MakeCall(*server_, Call::kListCampaigns, "Bearer ogt_aaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaa", f, ""),
              GrpcStatusIs(grpc::StatusCode::UNAUTHENTICATED, HasSubstr("knows no such token")));
  {  // Two authorization values.
    grpc::ClientContext context;
    Prepare(context, admin_token);
    context.AddMetadata("authorization", admin_token);
    v1::ListCampaignsResponse response;
    EXPECT_THAT(server_->stub().ListCampaigns(&context, v1::ListCampaignsRequest(), &response),
                GrpcStatusIs(grpc::StatusCode::UNAUTHENTICATED, HasSubstr("sent 2 times")));
  }
  // An unauthenticated write stores nothing.
  f.tell_trial = 1;
  EXPECT_THAT(MakeCall(*server_, Call::kAsk, "", f, ""), GrpcStatusIs(grpc::StatusCode::UNAUTHENTICATED, _));
  absl::StatusOr<v1::CampaignView> view = ClientWith(admin_token)->GetCampaign("alpha");
  ASSERT_TRUE(view.ok());
  EXPECT_EQ(view->status().leased(), 0);
  // The scheme is case-insensitive (RFC 7235 section 2.1).
  EXPECT_TRUE(MakeCall(*server_, Call::kGetCampaign, "bearer " + admin_token.substr(7), f, "").ok());
}

TEST_F(AuthTest, TheHealthServiceAnswersWithoutAToken) {
  server_->Start();
  std::unique_ptr<grpc::health::v1::Health::Stub> health = grpc::health::v1::Health::NewStub(server_->channel());
  grpc::ClientContext context;
  context.set_deadline(std::chrono::system_clock::now() + kCallTimeout);
  grpc::health::v1::HealthCheckResponse response;
  const grpc::Status status = health->Check(&context, grpc::health::v1::HealthCheckRequest(), &response);
  ASSERT_TRUE(status.ok()) << status.error_message();
  EXPECT_EQ(response.status(), grpc::health::v1::HealthCheckResponse::SERVING);
}

TEST_F(AuthTest, ACampaignLimitedTokenSeesAndUsesOnlyItsCampaigns) {
  server_->Start();
  std::unique_ptr<client::Client> admin = ClientWith(server_->MakeToken("alice", "admin"));
  ASSERT_TRUE(admin->CreateCampaign(Design("alpha")).ok());
  ASSERT_TRUE(admin->CreateCampaign(Design("beta")).ok());
  std::unique_ptr<client::Client> line = ClientWith(server_->MakeToken("line-a", "worker", {"alpha", "gamma"}));

  absl::StatusOr<v1::ListCampaignsResponse> listed = line->ListCampaigns();
  ASSERT_TRUE(listed.ok()) << listed.status();
  ASSERT_EQ(listed->campaigns_size(), 1);
  EXPECT_EQ(listed->campaigns(0).name(), "alpha");
  EXPECT_TRUE(line->Ask("alpha", 1, "w").ok());
  EXPECT_THAT(line->Ask("beta", 1, "w").status().message(), HasSubstr("campaign 'beta': token 'line-a' is limited"));
  EXPECT_EQ(line->GetCampaign("beta").status().code(), absl::StatusCode::kPermissionDenied);
  // A campaign outside the scope is refused whether it exists or not: the token learns nothing.
  EXPECT_EQ(line->GetCampaign("delta").status().code(), absl::StatusCode::kPermissionDenied);
  // Inside the scope, a campaign that does not exist yet is NOT_FOUND as usual.
  EXPECT_EQ(line->GetCampaign("gamma").status().code(), absl::StatusCode::kNotFound);

  // A limited admin may create the campaigns of its scope only.
  std::unique_ptr<client::Client> owner = ClientWith(server_->MakeToken("gamma-owner", "admin", {"gamma"}));
  EXPECT_TRUE(owner->CreateCampaign(Design("gamma")).ok());
  EXPECT_EQ(owner->CreateCampaign(Design("epsilon")).status().code(), absl::StatusCode::kPermissionDenied);
  EXPECT_EQ(owner->SetPhase("alpha", v1::PHASE_COMMAND_PAUSE).status().code(), absl::StatusCode::kPermissionDenied);
  absl::StatusOr<v1::CampaignView> alpha = admin->GetCampaign("alpha");
  ASSERT_TRUE(alpha.ok());
  EXPECT_EQ(alpha->status().phase(), v1::CAMPAIGN_PHASE_OPEN);
}

TEST_F(AuthTest, ARevokedTokenIsRefusedWithoutARestart) {
  service::AuthOptions options;
  options.refresh_interval = absl::Seconds(5);
  server_->Start(options);
  std::unique_ptr<client::Client> admin = ClientWith(server_->MakeToken("alice", "admin"));
  ASSERT_TRUE(admin->CreateCampaign(Design("alpha")).ok());

  // Through the server (as `ogived token revoke` does while a server runs): at once.
  std::unique_ptr<client::Client> temp = ClientWith(server_->MakeToken("temp", "worker"));
  ASSERT_TRUE(temp->Ask("alpha", 1, "w").ok());
  server_->Revoke("temp");
  EXPECT_THAT(temp->Ask("alpha", 1, "w").status().message(), HasSubstr("the token 'temp' was revoked"));
  EXPECT_EQ(temp->GetCampaign("alpha").status().code(), absl::StatusCode::kUnauthenticated);

  // Written to the table some other way: within the refresh interval.
  std::unique_ptr<client::Client> other = ClientWith(server_->MakeToken("other", "reader"));
  ASSERT_TRUE(other->GetCampaign("alpha").ok());
  ASSERT_TRUE(server_->store().RevokeToken("other", absl::ToUnixNanos(server_->now())).ok());
  EXPECT_TRUE(other->GetCampaign("alpha").ok());
  server_->Advance(absl::Seconds(5));
  EXPECT_EQ(other->GetCampaign("alpha").status().code(), absl::StatusCode::kUnauthenticated);

  // An open Watch ends once its token is revoked.
  const std::string watcher = server_->MakeToken("watcher", "reader");
  grpc::ClientContext context;
  Prepare(context, watcher);
  v1::WatchRequest request;
  request.set_campaign("alpha");
  std::unique_ptr<grpc::ClientReader<v1::CampaignView>> reader = server_->stub().Watch(&context, request);
  v1::CampaignView view;
  ASSERT_TRUE(reader->Read(&view));
  const absl::Time revoked_at = absl::Now();
  server_->Revoke("watcher");
  while (reader->Read(&view)) {
  }
  EXPECT_THAT(reader->Finish(), GrpcStatusIs(grpc::StatusCode::UNAUTHENTICATED, HasSubstr("revoked")));
  EXPECT_LT(absl::Now() - revoked_at, absl::Seconds(5));
}

TEST_F(AuthTest, ReportsAndPhaseChangesRecordTheTokenLabel) {
  server_->Start();
  std::unique_ptr<client::Client> admin = ClientWith(server_->MakeToken("alice", "admin"));
  std::unique_ptr<client::Client> farm = ClientWith(server_->MakeToken("farm-a", "worker"));
  std::unique_ptr<client::Client> second = ClientWith(server_->MakeToken("farm-b", "worker"));
  ASSERT_TRUE(admin->CreateCampaign(Design("alpha")).ok());
  absl::StatusOr<v1::AskResponse> asked = farm->Ask("alpha", 2, "node-1");
  ASSERT_TRUE(asked.ok());
  v1::Report report;
  report.set_trial(asked->trials(0).number());
  report.mutable_outcome()->set_score(0.25);
  ASSERT_TRUE(farm->Tell("alpha", {report}, "node-1").ok());
  // The same report again from another token: a duplicate, the first reporter stays.
  absl::StatusOr<v1::TellResponse> again = second->Tell("alpha", {report}, "node-2");
  ASSERT_TRUE(again.ok());
  EXPECT_TRUE(again->results(0).duplicate());
  ASSERT_TRUE(admin->SetPhase("alpha", v1::PHASE_COMMAND_PAUSE).ok());

  auto check = [&](const std::string& when) {
    absl::StatusOr<std::vector<v1::Trial>> trials = admin->ListAllTrials("alpha");
    ASSERT_TRUE(trials.ok()) << when;
    EXPECT_EQ((*trials)[0].reported_by(), "farm-a") << when;
    EXPECT_EQ((*trials)[1].reported_by(), "") << when << ": not reported";
    absl::StatusOr<v1::CampaignView> view = admin->GetCampaign("alpha");
    ASSERT_TRUE(view.ok());
    EXPECT_EQ(view->status().best().reported_by(), "farm-a") << when;
  };
  check("served");
  absl::StatusOr<std::vector<storage::Event>> events = server_->store().ListEvents(1, 100);
  ASSERT_TRUE(events.ok()) << events.status();
  std::map<std::string, std::vector<std::string>> labels_by_kind;
  for (const storage::Event& e : *events) labels_by_kind[e.kind].push_back(e.token_label);
  EXPECT_THAT(labels_by_kind["ask"], ElementsAre("farm-a", "farm-a"));
  EXPECT_THAT(labels_by_kind["tell"], ElementsAre("farm-a"));
  EXPECT_THAT(labels_by_kind["phase"], ElementsAre("alice"));

  // Stored, not only kept in memory.
  server_->Stop();
  server_->Start();
  admin = ClientWith(server_->MakeToken("bob", "admin"));
  check("after a restart");
}

// A lease that runs out is logged as a lapse whichever request finds it first: here the next Ask,
// before any sweep. The lapse carries no token label (no caller caused it); the ask carries its own.
TEST_F(AuthTest, ALapseFoundByAnAskIsLoggedAsALapseWithoutTheCallersLabel) {
  server_->Start();
  std::unique_ptr<client::Client> admin = ClientWith(server_->MakeToken("alice", "admin"));
  std::unique_ptr<client::Client> farm = ClientWith(server_->MakeToken("farm-a", "worker"));
  ASSERT_TRUE(admin->CreateCampaign(Design("alpha")).ok());
  absl::StatusOr<v1::AskResponse> first = farm->Ask("alpha", 1, "node-1", /*lease_seconds=*/10);
  ASSERT_TRUE(first.ok()) << first.status();
  server_->Advance(absl::Seconds(11));
  absl::StatusOr<v1::AskResponse> second = farm->Ask("alpha", 1, "node-2", /*lease_seconds=*/10);
  ASSERT_TRUE(second.ok()) << second.status();
  absl::StatusOr<std::vector<storage::Event>> events = server_->store().ListEvents(1, 100);
  ASSERT_TRUE(events.ok()) << events.status();
  std::vector<std::string> log;
  for (const storage::Event& e : *events) {
    log.push_back(absl::StrCat(e.kind, " ", e.trial, " ", e.worker, " [", e.token_label, "]"));
  }
  EXPECT_THAT(log, ElementsAre("ask 1 node-1 [farm-a]", "lapse 1 node-1 []", "ask 2 node-2 [farm-a]"));
}

TEST_F(AuthTest, EachTokenIsHeldToItsRequestRate) {
  service::AuthOptions options;
  options.max_requests_per_second_per_token = 1;  // bursts of 2
  server_->Start(options);
  const std::string busy = server_->MakeToken("busy", "admin");
  const std::string calm = server_->MakeToken("calm", "reader");
  Fixture f;
  EXPECT_TRUE(MakeCall(*server_, Call::kListCampaigns, busy, f, "").ok());
  EXPECT_TRUE(MakeCall(*server_, Call::kListCampaigns, busy, f, "").ok());
  EXPECT_THAT(MakeCall(*server_, Call::kListCampaigns, busy, f, ""),
              GrpcStatusIs(grpc::StatusCode::RESOURCE_EXHAUSTED,
                           AllOf(HasSubstr("token 'busy'"), HasSubstr("--max-requests-per-second-per-token"))));
  // The refusal says why and when to come back: ErrorInfo RATE_LIMITED naming the token, and a
  // RetryInfo of one request's refill (1 s at 1 request per second).
  {
    const absl::Status limited =
        client::StatusFromGrpc(MakeCall(*server_, Call::kListCampaigns, busy, f, ""));
    std::optional<client::ErrorReason> why = client::ErrorReasonOf(limited);
    ASSERT_TRUE(why.has_value()) << limited;
    EXPECT_EQ(why->reason, "RATE_LIMITED");
    EXPECT_EQ(why->domain, "ogive.v1");
    EXPECT_EQ(why->metadata["token"], "busy");
    ASSERT_TRUE(why->retry_delay.has_value());
    EXPECT_EQ(*why->retry_delay, absl::Seconds(1));
  }
  EXPECT_TRUE(MakeCall(*server_, Call::kListCampaigns, calm, f, "").ok());
  server_->Advance(absl::Seconds(1));
  EXPECT_TRUE(MakeCall(*server_, Call::kListCampaigns, busy, f, "").ok());
  EXPECT_EQ(MakeCall(*server_, Call::kListCampaigns, busy, f, "").error_code(), grpc::StatusCode::RESOURCE_EXHAUSTED);
}

}  // namespace
}  // namespace ogive
