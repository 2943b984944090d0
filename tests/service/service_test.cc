// The ogive service over the wire: a real in-process gRPC server (OgiveService over a Registry over
// a SqliteStore on a temporary file, the real clock, the default health service) on a loopback port
// picked at run time, driven through ogive::client::Client, the generated stub and a generic stub
// (the server side is touched only to sweep leases and to flip the health status, as ogived's own
// sweeper and drain do). Covers the ask/tell path for every parameter and outcome kind, trial
// pagination, Watch, restarts (bit-identical continuation, memory equal to disk), lapsed leases and
// late reports, budgets, targets, staleness, concurrent workers, refused input with its code,
// message and unchanged stored state, server limits, and the health service.
#include <unistd.h>

#include <algorithm>
#include <atomic>
#include <chrono>
#include <cmath>
#include <cstdint>
#include <cstdio>
#include <functional>
#include <limits>
#include <memory>
#include <optional>
#include <string>
#include <thread>
#include <vector>

#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "absl/strings/str_cat.h"
#include "absl/synchronization/mutex.h"
#include "absl/synchronization/notification.h"
#include "absl/time/clock.h"
#include "absl/time/time.h"
#include "client/error_reason.h"
#include "client/ogive_client.h"
#include "gmock/gmock.h"
#include "google/protobuf/descriptor.h"
#include "google/protobuf/io/coded_stream.h"
#include "google/protobuf/io/zero_copy_stream_impl_lite.h"
#include "google/protobuf/message.h"
#include "google/protobuf/unknown_field_set.h"
#include "grpcpp/generic/generic_stub.h"
#include "grpcpp/grpcpp.h"
#include "grpcpp/health_check_service_interface.h"
#include "gtest/gtest.h"
#include "ogive/v1/service.grpc.pb.h"
#include "ogive/v1/service.pb.h"
#include "ogive/v1/campaign.pb.h"
#include "server/service/grpc_service.h"
#include "server/service/limits.h"
#include "server/service/registry.h"
#include "server/service/request_body.h"
#include "storage/sqlite_store.h"
#include "tests/support/status_activity.h"

namespace ogive {
namespace {

using ::testing::AllOf;
using ::testing::ElementsAre;
using ::testing::ElementsAreArray;
using ::testing::HasSubstr;

// The server's receive limit in these tests: small, so that an oversized request is cheap to build.
constexpr int kMaxReceiveBytes = 64 << 10;
// Every call and every wait in this file ends within this time.
constexpr absl::Duration kCallTimeout = absl::Seconds(10);

MATCHER_P2(StatusIs, code, message_matcher, "") {
  *result_listener << "status is " << arg;
  return arg.code() == code && ::testing::ExplainMatchResult(
                                   message_matcher, std::string(arg.message()), result_listener);
}

// `view` without its recent activity (StatusSummary.workers, reports_last_hour, as_of_unix_ms),
// which is dated by the server's clock and partly kept in memory only: for comparing views.
v1::CampaignView WithoutActivity(v1::CampaignView view) {
  testing::ClearActivity(view.mutable_status());
  return view;
}

// Protobuf's default serialization orders map entries by hash; this one sorts them, so equal
// messages give equal bytes (doubles included, bit for bit).
std::string DeterministicBytes(const google::protobuf::Message& message) {
  std::string bytes;
  {
    google::protobuf::io::StringOutputStream stream(&bytes);
    google::protobuf::io::CodedOutputStream coded(&stream);
    coded.SetSerializationDeterministic(true);
    EXPECT_TRUE(message.SerializeToCodedStream(&coded));
  }
  return bytes;
}

std::string TempDbPath(const std::string& name) {
  return absl::StrCat(::testing::TempDir(), "ogive_service_test_", getpid(), "_", name, ".db");
}

void RemoveDb(const std::string& path) {
  for (const char* suffix : {"", "-wal", "-shm", "-journal", ".lock"}) {
    std::remove(absl::StrCat(path, suffix).c_str());
  }
}

void SetDeadline(grpc::ClientContext& context) {
  context.set_deadline(std::chrono::system_clock::now() +
                       std::chrono::milliseconds(absl::ToInt64Milliseconds(kCallTimeout)));
}

// One ogived in this process: store, registry, service and gRPC server, on 127.0.0.1 and a port the
// kernel picked. Stop() tears all four down in the order ogived does; Start() again reopens the
// same file, as a restarted ogived would.
class LoopbackServer {
 public:
  explicit LoopbackServer(std::string db_path, service::ServiceLimits limits = {})
      : db_path_(std::move(db_path)), limits_(limits) {
    limits_.max_message_bytes = kMaxReceiveBytes;
  }
  ~LoopbackServer() { Stop(); }
  LoopbackServer(const LoopbackServer&) = delete;
  LoopbackServer& operator=(const LoopbackServer&) = delete;

  absl::Status Start() {
    absl::StatusOr<std::unique_ptr<storage::SqliteStore>> store =
        storage::SqliteStore::Open(db_path_);
    if (!store.ok()) return store.status();
    store_ = *std::move(store);
    registry_ = std::make_unique<service::Registry>(store_.get(), limits_);
    if (absl::Status s = registry_->LoadAll(); !s.ok()) return s;
    service::AuthOptions open;
    open.require_tokens = false;  // as `ogived --no-auth`; auth_test checks tokens
    absl::StatusOr<std::unique_ptr<service::Authorizer>> authorizer =
        service::Authorizer::Create(nullptr, open, [] { return absl::Now(); });
    if (!authorizer.ok()) return authorizer.status();
    authorizer_ = *std::move(authorizer);
    service_ = std::make_unique<service::OgiveService>(registry_.get(), authorizer_.get(), [] { return absl::Now(); });
    grpc::EnableDefaultHealthCheckService(true);
    grpc::ServerBuilder builder;
    port_ = 0;
    builder.AddListeningPort("127.0.0.1:0", grpc::InsecureServerCredentials(), &port_);
    builder.SetMaxReceiveMessageSize(service::TransportReceiveLimit(limits_));
    builder.RegisterService(service_.get());
    server_ = builder.BuildAndStart();
    if (server_ == nullptr || port_ == 0) {
      return absl::UnavailableError("cannot listen on loopback");
    }
    return absl::OkStatus();
  }

  void Stop() {
    if (service_ != nullptr) {
      service_->StopWatches();
      EXPECT_TRUE(service_->Drain(absl::Seconds(10))) << "calls still in flight after 10 s";
    }
    if (server_ != nullptr) {
      server_->Shutdown(std::chrono::system_clock::now() + std::chrono::seconds(5));
      server_->Wait();
    }
    server_.reset();
    service_.reset();
    authorizer_.reset();
    registry_.reset();
    store_.reset();  // drains the writer
  }

  std::string target() const { return absl::StrCat("127.0.0.1:", port_); }
  service::Registry& registry() { return *registry_; }
  // What ogived does first on SIGTERM: new calls are refused from now on.
  bool Drain() { return service_->Drain(absl::Seconds(10)); }
  grpc::Server& server() { return *server_; }

  std::unique_ptr<client::Client> NewClient() const {
    client::ClientOptions options;
    options.call_timeout = kCallTimeout;
    options.max_attempts = 2;
    options.first_backoff = absl::Milliseconds(50);
    return client::Client::Connect(target(), options);
  }

 private:
  const std::string db_path_;
  service::ServiceLimits limits_;
  int port_ = 0;
  std::unique_ptr<storage::SqliteStore> store_;
  std::unique_ptr<service::Registry> registry_;
  std::unique_ptr<service::Authorizer> authorizer_;
  std::unique_ptr<service::OgiveService> service_;
  std::unique_ptr<grpc::Server> server_;
};

// ---- Designs ----

v1::Parameter Real(const std::string& name, double low, double high, bool log = false) {
  v1::Parameter p;
  p.set_name(name);
  p.mutable_real()->set_low(low);
  p.mutable_real()->set_high(high);
  p.mutable_real()->set_log(log);
  return p;
}

v1::Parameter Integer(const std::string& name, int64_t low, int64_t high) {
  v1::Parameter p;
  p.set_name(name);
  p.mutable_integer()->set_low(low);
  p.mutable_integer()->set_high(high);
  return p;
}

v1::Parameter Categorical(const std::string& name, const std::vector<std::string>& options) {
  v1::Parameter p;
  p.set_name(name);
  p.mutable_categorical();  // set even when `options` is empty
  for (const std::string& o : options) p.mutable_categorical()->add_options(o);
  return p;
}

v1::Parameter Flag(const std::string& name) {
  v1::Parameter p;
  p.set_name(name);
  p.mutable_flag();
  return p;
}

v1::CampaignDesign ScoredDesign(const std::string& name, std::vector<v1::Parameter> parameters) {
  v1::CampaignDesign d;
  d.set_name(name);
  for (v1::Parameter& p : parameters) *d.add_parameters() = std::move(p);
  d.mutable_objective()->set_direction(v1::DIRECTION_LOWER_IS_BETTER);
  d.set_seed(17);
  d.set_lease_seconds(600);
  return d;
}

// Every kind of parameter: a real, a log-scaled real, an integer, a categorical and a flag.
v1::CampaignDesign MixedDesign(const std::string& name) {
  v1::CampaignDesign d = ScoredDesign(
      name, {Real("x", -5, 5), Real("rate", 1e-4, 1, /*log=*/true), Integer("layers", 1, 8),
             Categorical("solver", {"cg", "gmres", "bicgstab"}), Flag("warm")});
  d.set_population_size(6);
  return d;
}

v1::CampaignDesign GradedDesign(const std::string& name) {
  v1::CampaignDesign d = ScoredDesign(name, {Real("temp", 100, 200), Flag("vacuum")});
  d.mutable_objective()->mutable_grade_scale()->add_labels("cracked");
  d.mutable_objective()->mutable_grade_scale()->add_labels("poor");
  d.mutable_objective()->mutable_grade_scale()->add_labels("fair");
  d.mutable_objective()->mutable_grade_scale()->add_labels("good");
  d.set_population_size(4);
  return d;
}

// A shifted sphere over three reals; its minimum 0 lies away from the default start (the middle).
v1::CampaignDesign SphereDesign(const std::string& name) {
  v1::CampaignDesign d = ScoredDesign(name, {Real("a", -5, 5), Real("b", -5, 5), Real("c", -5, 5)});
  d.set_seed(20260101);
  return d;
}

double Sphere(const v1::Candidate& c) {
  const double a = c.values().at("a").real() - 1.25;
  const double b = c.values().at("b").real() + 2.5;
  const double d = c.values().at("c").real() - 0.75;
  return a * a + b * b + d * d;
}

double MixedScore(const v1::Candidate& c) {
  const double x = c.values().at("x").real() - 1.0;
  const double rate = std::log10(c.values().at("rate").real()) + 2.0;
  const double layers = static_cast<double>(c.values().at("layers").integer() - 3);
  const double solver = c.values().at("solver").categorical() == "gmres" ? 0.0 : 1.0;
  const double warm = c.values().at("warm").flag() ? 0.0 : 0.5;
  return x * x + rate * rate + layers * layers + solver + warm;
}

// Every parameter of `design` has a value of its kind inside its bounds, and nothing else is there.
void ExpectInsideDesign(const v1::Candidate& candidate, const v1::CampaignDesign& design) {
  EXPECT_EQ(candidate.values_size(), design.parameters_size());
  for (const v1::Parameter& p : design.parameters()) {
    SCOPED_TRACE(p.name());
    auto it = candidate.values().find(p.name());
    ASSERT_NE(it, candidate.values().end());
    const v1::Value& v = it->second;
    switch (p.kind_case()) {
      case v1::Parameter::kReal:
        ASSERT_EQ(v.kind_case(), v1::Value::kReal);
        EXPECT_TRUE(std::isfinite(v.real()));
        EXPECT_GE(v.real(), p.real().low());
        EXPECT_LE(v.real(), p.real().high());
        break;
      case v1::Parameter::kInteger:
        ASSERT_EQ(v.kind_case(), v1::Value::kInteger);
        EXPECT_GE(v.integer(), p.integer().low());
        EXPECT_LE(v.integer(), p.integer().high());
        break;
      case v1::Parameter::kCategorical:
        ASSERT_EQ(v.kind_case(), v1::Value::kCategorical);
        EXPECT_THAT(p.categorical().options(), ::testing::Contains(v.categorical()));
        break;
      case v1::Parameter::kFlag:
        EXPECT_EQ(v.kind_case(), v1::Value::kFlag);
        break;
      case v1::Parameter::KIND_NOT_SET:
        ADD_FAILURE() << "design parameter without a kind";
        break;
    }
  }
}

// ---- Reports ----

v1::Report ScoreReport(int64_t trial, double score, const std::string& note = "") {
  v1::Report r;
  r.set_trial(trial);
  r.mutable_outcome()->set_score(score);
  r.mutable_outcome()->set_note(note);
  return r;
}

v1::Report GradeReport(int64_t trial, const std::string& grade) {
  v1::Report r;
  r.set_trial(trial);
  r.mutable_outcome()->set_grade(grade);
  return r;
}

v1::Report InfeasibleReport(int64_t trial, const std::string& note = "") {
  v1::Report r;
  r.set_trial(trial);
  r.mutable_outcome()->mutable_infeasible();
  r.mutable_outcome()->set_note(note);
  return r;
}

v1::Report VoidReport(int64_t trial, const std::string& note = "") {
  v1::Report r;
  r.set_trial(trial);
  r.mutable_outcome()->mutable_void_();
  r.mutable_outcome()->set_note(note);
  return r;
}

std::vector<int64_t> Numbers(const v1::AskResponse& response) {
  std::vector<int64_t> numbers;
  for (const v1::Trial& t : response.trials()) numbers.push_back(t.number());
  return numbers;
}

std::vector<int64_t> Numbers(const std::vector<v1::Trial>& trials) {
  std::vector<int64_t> numbers;
  for (const v1::Trial& t : trials) numbers.push_back(t.number());
  return numbers;
}

int64_t StateTotal(const v1::StatusSummary& s) {
  return s.leased() + s.reported() + s.lapsed() + s.voided();
}

// The health service's answer for `service` through a generic stub (grpc.health.v1 is not compiled
// into this build): the HealthCheckResponse's status enum (1 SERVING, 2 NOT_SERVING), or the call's
// error. The request and response are encoded by hand: field 1 of each (service name; status).
absl::StatusOr<int> HealthCheck(const std::shared_ptr<grpc::Channel>& channel,
                                const std::string& service) {
  std::string request_bytes;
  if (!service.empty()) {
    request_bytes.push_back('\x0a');  // field 1, length-delimited
    request_bytes.push_back(static_cast<char>(service.size()));
    request_bytes += service;
  }
  grpc::Slice slice(request_bytes);
  grpc::ByteBuffer request(&slice, 1);
  grpc::ByteBuffer response;
  grpc::ClientContext context;
  SetDeadline(context);
  grpc::GenericStub stub(channel);
  absl::Notification done;
  grpc::Status status;
  stub.UnaryCall(&context, "/grpc.health.v1.Health/Check", grpc::StubOptions(), &request, &response,
                 [&](grpc::Status s) {
                   status = std::move(s);
                   done.Notify();
                 });
  if (!done.WaitForNotificationWithTimeout(kCallTimeout + absl::Seconds(1))) {
    return absl::DeadlineExceededError("health check did not complete");
  }
  if (!status.ok()) {
    return absl::Status(static_cast<absl::StatusCode>(status.error_code()), status.error_message());
  }
  std::vector<grpc::Slice> slices;
  if (!response.Dump(&slices).ok()) return absl::InternalError("cannot read the response");
  std::string bytes;
  for (const grpc::Slice& s : slices)
    bytes.append(reinterpret_cast<const char*>(s.begin()), s.size());
  google::protobuf::UnknownFieldSet fields;
  if (!fields.ParseFromString(bytes)) return absl::InternalError("unparsable HealthCheckResponse");
  for (int i = 0; i < fields.field_count(); ++i) {
    if (fields.field(i).number() == 1 &&
        fields.field(i).type() == google::protobuf::UnknownField::TYPE_VARINT) {
      return static_cast<int>(fields.field(i).varint());
    }
  }
  return 0;  // UNKNOWN: proto3 leaves a zero enum off the wire
}

// ---- The fixture: one server, one client ----

class ServiceTest : public ::testing::Test {
 protected:
  void SetUp() override {
    db_path_ = TempDbPath(::testing::UnitTest::GetInstance()->current_test_info()->name());
    RemoveDb(db_path_);
    server_ = std::make_unique<LoopbackServer>(db_path_);
    const absl::Status started = server_->Start();
    ASSERT_TRUE(started.ok()) << started;
    client_ = server_->NewClient();
  }

  void TearDown() override {
    client_.reset();
    server_.reset();
    RemoveDb(db_path_);
  }

  v1::CampaignView Create(const v1::CampaignDesign& design) {
    absl::StatusOr<v1::CampaignView> view = client_->CreateCampaign(design);
    EXPECT_TRUE(view.ok()) << view.status();
    return view.ok() ? *view : v1::CampaignView();
  }

  v1::CampaignView Get(const std::string& campaign) {
    absl::StatusOr<v1::CampaignView> view = client_->GetCampaign(campaign);
    EXPECT_TRUE(view.ok()) << view.status();
    return view.ok() ? *view : v1::CampaignView();
  }

  std::vector<v1::Trial> AllTrials(const std::string& campaign,
                                   v1::TrialState state = v1::TRIAL_STATE_UNSPECIFIED) {
    absl::StatusOr<std::vector<v1::Trial>> trials = client_->ListAllTrials(campaign, state);
    EXPECT_TRUE(trials.ok()) << trials.status();
    return trials.ok() ? *trials : std::vector<v1::Trial>();
  }

  v1::AskResponse AskOk(const std::string& campaign, int count, double lease_seconds = 0) {
    absl::StatusOr<v1::AskResponse> asked = client_->Ask(campaign, count, "worker-1", lease_seconds);
    EXPECT_TRUE(asked.ok()) << asked.status();
    return asked.ok() ? *asked : v1::AskResponse();
  }

  v1::TellResponse TellOk(const std::string& campaign, const std::vector<v1::Report>& reports) {
    absl::StatusOr<v1::TellResponse> told = client_->Tell(campaign, reports, "worker-1");
    EXPECT_TRUE(told.ok()) << told.status();
    if (!told.ok()) return v1::TellResponse();
    EXPECT_EQ(told->results_size(), static_cast<int>(reports.size()));
    return *told;
  }

  // What the server shows of a campaign: its view and every trial, as text (maps sorted).
  // The view's recent activity (StatusSummary.workers and friends) is left out: it is dated by the
  // clock and asks are not stored.
  std::string StoredState(const std::string& campaign) {
    std::string state = WithoutActivity(Get(campaign)).DebugString();
    for (const v1::Trial& t : AllTrials(campaign)) state += t.DebugString();
    return state;
  }

  // Restarts the server on the same file and checks that each campaign shows what it showed before:
  // what the server had in memory was on disk.
  void ExpectSameAfterRestart(const std::vector<std::string>& campaigns) {
    std::vector<std::string> before;
    for (const std::string& campaign : campaigns) before.push_back(StoredState(campaign));
    client_.reset();
    server_->Stop();
    const absl::Status restarted = server_->Start();
    ASSERT_TRUE(restarted.ok()) << restarted;
    client_ = server_->NewClient();
    for (size_t i = 0; i < campaigns.size(); ++i) {
      EXPECT_EQ(StoredState(campaigns[i]), before[i]) << "campaign " << campaigns[i];
    }
  }

  std::shared_ptr<grpc::Channel> Channel() const {
    return grpc::CreateChannel(server_->target(), grpc::InsecureChannelCredentials());
  }

  std::string db_path_;
  std::unique_ptr<LoopbackServer> server_;
  std::unique_ptr<client::Client> client_;
};

// ---- The ask/tell path ----

// A note with what text columns and log lines tend to mangle: non-ASCII letters, quotes, '=', a
// newline, a tab and a NUL byte.
std::string OddNote() {
  constexpr char kNote[] = "gr\xc3\xbcn \"=\" \xe2\x9c\x93\n\tend\0after";
  return std::string(kNote, sizeof(kNote) - 1);
}

TEST_F(ServiceTest, AskTellCoversEveryParameterAndOutcomeKind) {
  const v1::CampaignDesign design = MixedDesign("mixed");
  const v1::CampaignView created = Create(design);
  EXPECT_EQ(created.name(), "mixed");
  EXPECT_EQ(created.design().parameters_size(), 5);
  EXPECT_EQ(created.status().phase(), v1::CAMPAIGN_PHASE_OPEN);
  EXPECT_EQ(created.status().generation(), 0);
  ASSERT_EQ(created.status().population_size(), 6);
  const int lambda = created.status().population_size();

  const int64_t asked_at_ms = absl::ToUnixMillis(absl::Now());
  const v1::AskResponse first = AskOk("mixed", lambda, 60);
  ASSERT_EQ(first.trials_size(), lambda);
  EXPECT_THAT(Numbers(first), ElementsAre(1, 2, 3, 4, 5, 6));
  for (const v1::Trial& t : first.trials()) {
    SCOPED_TRACE(t.number());
    EXPECT_EQ(t.state(), v1::TRIAL_STATE_LEASED);
    EXPECT_EQ(t.generation(), 0);
    EXPECT_EQ(t.worker(), "worker-1");
    EXPECT_FALSE(t.has_outcome());
    EXPECT_NEAR(static_cast<double>(t.lease_deadline_unix_ms() - asked_at_ms), 60000.0, 5000.0);
    ExpectInsideDesign(t.candidate(), design);
  }

  // One report of each kind (trial 6 stays out): λ - 2 informative outcomes, no update yet.
  const double score1 = MixedScore(first.trials(0).candidate());
  const v1::TellResponse told =
      TellOk("mixed", {ScoreReport(1, score1, "first run"), InfeasibleReport(2, "pressure limit"),
                       VoidReport(3, "node crashed"), ScoreReport(4, 10.0, OddNote()),
                       ScoreReport(5, 11.0)});
  for (const v1::ReportResult& r : told.results()) {
    EXPECT_EQ(r.code(), 0) << r.message();
    EXPECT_FALSE(r.duplicate());
    EXPECT_FALSE(r.late());
  }
  EXPECT_EQ(told.generation(), 0);
  EXPECT_EQ(told.phase(), v1::CAMPAIGN_PHASE_OPEN);

  v1::StatusSummary status = Get("mixed").status();
  EXPECT_EQ(status.leased(), 1);
  EXPECT_EQ(status.reported(), 4);
  EXPECT_EQ(status.voided(), 1);
  EXPECT_EQ(status.lapsed(), 0);
  EXPECT_EQ(status.pending(), 4);
  EXPECT_EQ(status.consumed(), 0);
  EXPECT_EQ(StateTotal(status), 6);
  EXPECT_EQ(status.generation(), 0);

  std::vector<v1::Trial> trials = AllTrials("mixed");
  ASSERT_EQ(trials.size(), 6u);
  EXPECT_EQ(trials[0].state(), v1::TRIAL_STATE_REPORTED);
  EXPECT_EQ(trials[0].outcome().kind_case(), v1::Outcome::kScore);
  EXPECT_EQ(trials[0].outcome().score(), score1);
  EXPECT_EQ(trials[0].outcome().note(), "first run");
  EXPECT_EQ(trials[0].use(), v1::OUTCOME_USE_PENDING);
  EXPECT_GE(trials[0].reported_at_unix_ms(), asked_at_ms);
  EXPECT_EQ(trials[1].state(), v1::TRIAL_STATE_REPORTED);
  EXPECT_TRUE(trials[1].outcome().has_infeasible());
  EXPECT_EQ(trials[1].outcome().note(), "pressure limit");
  EXPECT_EQ(trials[2].state(), v1::TRIAL_STATE_VOIDED);
  EXPECT_TRUE(trials[2].outcome().has_void_());
  EXPECT_EQ(trials[2].outcome().note(), "node crashed");
  EXPECT_EQ(trials[2].use(), v1::OUTCOME_USE_UNSPECIFIED);
  EXPECT_EQ(trials[3].outcome().note(), OddNote());
  EXPECT_EQ(trials[5].state(), v1::TRIAL_STATE_LEASED);
  EXPECT_FALSE(trials[5].has_outcome());
  for (int i = 0; i < 6; ++i) {
    // What ListTrials shows of a candidate is what Ask handed out.
    EXPECT_EQ(DeterministicBytes(trials[i].candidate()),
              DeterministicBytes(first.trials(i).candidate()));
  }

  // The void left a slot: one more trial, and the λ-th informative outcome makes generation 1.
  const v1::AskResponse refill = AskOk("mixed", 1);
  ASSERT_EQ(refill.trials_size(), 1);
  EXPECT_EQ(refill.trials(0).number(), 7);
  EXPECT_EQ(TellOk("mixed", {ScoreReport(6, MixedScore(first.trials(5).candidate()))}).generation(),
            0);
  EXPECT_EQ(
      TellOk("mixed", {ScoreReport(7, MixedScore(refill.trials(0).candidate()))}).generation(), 1);
  status = Get("mixed").status();
  EXPECT_EQ(status.generation(), 1);
  EXPECT_EQ(status.consumed(), lambda);
  EXPECT_EQ(status.pending(), 0);
  EXPECT_EQ(status.reported(), lambda);
  EXPECT_EQ(status.voided(), 1);
  EXPECT_EQ(StateTotal(status), 7);
  for (const v1::Trial& t : AllTrials("mixed")) {
    SCOPED_TRACE(t.number());
    if (t.state() == v1::TRIAL_STATE_REPORTED) {
      EXPECT_EQ(t.use(), v1::OUTCOME_USE_CONSUMED);
      EXPECT_EQ(t.consumed_by(), 1);
    } else {
      EXPECT_EQ(t.consumed_by(), -1);
    }
  }
  EXPECT_TRUE(status.has_best());
  EXPECT_EQ(status.best().outcome().kind_case(), v1::Outcome::kScore);
  EXPECT_EQ(status.marginals_size(), 5);

  // Five more generations: every candidate inside its bounds, sampled from the current generation.
  for (int g = 1; g <= 5; ++g) {
    const v1::AskResponse asked = AskOk("mixed", lambda);
    ASSERT_EQ(asked.trials_size(), lambda);
    std::vector<v1::Report> reports;
    for (const v1::Trial& t : asked.trials()) {
      EXPECT_EQ(t.generation(), g);
      ExpectInsideDesign(t.candidate(), design);
      reports.push_back(ScoreReport(t.number(), MixedScore(t.candidate())));
    }
    EXPECT_EQ(TellOk("mixed", reports).generation(), g + 1);
  }
  status = Get("mixed").status();
  EXPECT_EQ(status.generation(), 6);
  EXPECT_EQ(StateTotal(status), 7 + 5 * lambda);
  EXPECT_EQ(status.consumed(), 6 * lambda);
  double best = std::numeric_limits<double>::infinity();
  for (const v1::Trial& t : AllTrials("mixed")) {
    if (t.outcome().kind_case() == v1::Outcome::kScore) best = std::min(best, t.outcome().score());
  }
  EXPECT_EQ(status.best().outcome().score(), best);
  ExpectSameAfterRestart({"mixed"});
}

// A draining server refuses new calls with UNAVAILABLE and reason DRAINING: retry, here or on another
// replica.
TEST_F(ServiceTest, ADrainingServerRefusesNewCallsWithReasonDraining) {
  ASSERT_TRUE(client_->CreateCampaign(MixedDesign("drained")).ok());
  ASSERT_TRUE(server_->Drain());
  const absl::Status refused = client_->GetCampaign("drained").status();
  EXPECT_EQ(refused.code(), absl::StatusCode::kUnavailable) << refused;
  std::optional<client::ErrorReason> why = client::ErrorReasonOf(refused);
  ASSERT_TRUE(why.has_value()) << refused;
  EXPECT_EQ(why->reason, "DRAINING");
  EXPECT_EQ(why->domain, "ogive.v1");
}

TEST_F(ServiceTest, GradedCampaignStoresGradesByLabel) {
  const v1::CampaignDesign design = GradedDesign("kiln");
  ASSERT_EQ(Create(design).status().population_size(), 4);
  const v1::AskResponse asked = AskOk("kiln", 4);
  ASSERT_EQ(asked.trials_size(), 4);
  for (const v1::Trial& t : asked.trials()) ExpectInsideDesign(t.candidate(), design);

  const v1::TellResponse told =
      TellOk("kiln", {GradeReport(1, "fair"), GradeReport(2, "good"), GradeReport(3, "cracked")});
  for (const v1::ReportResult& r : told.results()) EXPECT_EQ(r.code(), 0) << r.message();
  EXPECT_EQ(told.generation(), 0);
  // An infeasible outcome is informative too: the fourth one completes the cohort.
  EXPECT_EQ(TellOk("kiln", {InfeasibleReport(4, "kiln door open")}).generation(), 1);

  const std::vector<v1::Trial> trials = AllTrials("kiln");
  ASSERT_EQ(trials.size(), 4u);
  EXPECT_EQ(trials[0].outcome().grade(), "fair");
  EXPECT_EQ(trials[1].outcome().grade(), "good");
  EXPECT_EQ(trials[2].outcome().grade(), "cracked");
  EXPECT_TRUE(trials[3].outcome().has_infeasible());
  for (const v1::Trial& t : trials) {
    EXPECT_EQ(t.state(), v1::TRIAL_STATE_REPORTED);
    EXPECT_EQ(t.use(), v1::OUTCOME_USE_CONSUMED);
  }
  const v1::StatusSummary status = Get("kiln").status();
  EXPECT_EQ(status.generation(), 1);
  EXPECT_EQ(status.reported(), 4);
  EXPECT_EQ(status.consumed(), 4);
  EXPECT_EQ(status.best().number(), 2);
  EXPECT_EQ(status.best().outcome().grade(), "good");
  ExpectSameAfterRestart({"kiln"});
}

// ---- ListTrials ----

TEST_F(ServiceTest, ListTrialsPagesThroughEveryTrialAndFiltersByState) {
  v1::CampaignDesign design = ScoredDesign("pages", {Real("x", 0, 1)});
  design.set_population_size(50);  // no update in the way
  Create(design);
  ASSERT_EQ(AskOk("pages", 25).trials_size(), 25);
  std::vector<v1::Report> reports;
  for (int64_t n = 1; n <= 25; n += 2) reports.push_back(ScoreReport(n, static_cast<double>(n)));
  TellOk("pages", reports);  // 13 reported, 12 leased

  // Every trial, 7 per page: 7 + 7 + 7 + 4.
  v1::ListTrialsRequest request;
  request.set_campaign("pages");
  request.set_page_size(7);
  std::vector<int64_t> seen;
  std::vector<int> page_sizes;
  for (int page = 0; page < 10; ++page) {
    absl::StatusOr<v1::ListTrialsResponse> response = client_->ListTrials(request);
    ASSERT_TRUE(response.ok()) << response.status();
    page_sizes.push_back(response->trials_size());
    for (const v1::Trial& t : response->trials()) seen.push_back(t.number());
    if (response->next_page_token().empty()) break;
    request.set_page_token(response->next_page_token());
  }
  EXPECT_THAT(page_sizes, ElementsAre(7, 7, 7, 4));
  std::vector<int64_t> all(25);
  for (int i = 0; i < 25; ++i) all[i] = i + 1;
  EXPECT_THAT(seen, ElementsAreArray(all));

  // Only reported trials, 3 per page: 3 + 3 + 3 + 3 + 1.
  request.Clear();
  request.set_campaign("pages");
  request.set_state(v1::TRIAL_STATE_REPORTED);
  request.set_page_size(3);
  seen.clear();
  page_sizes.clear();
  for (int page = 0; page < 10; ++page) {
    absl::StatusOr<v1::ListTrialsResponse> response = client_->ListTrials(request);
    ASSERT_TRUE(response.ok()) << response.status();
    page_sizes.push_back(response->trials_size());
    for (const v1::Trial& t : response->trials()) {
      EXPECT_EQ(t.state(), v1::TRIAL_STATE_REPORTED);
      seen.push_back(t.number());
    }
    if (response->next_page_token().empty()) break;
    request.set_page_token(response->next_page_token());
  }
  EXPECT_THAT(page_sizes, ElementsAre(3, 3, 3, 3, 1));
  EXPECT_THAT(seen, ElementsAre(1, 3, 5, 7, 9, 11, 13, 15, 17, 19, 21, 23, 25));
  EXPECT_EQ(AllTrials("pages", v1::TRIAL_STATE_LEASED).size(), 12u);
  EXPECT_TRUE(AllTrials("pages", v1::TRIAL_STATE_LAPSED).empty());

  // A page that ends exactly at the last trial has no next page.
  request.Clear();
  request.set_campaign("pages");
  request.set_page_size(25);
  absl::StatusOr<v1::ListTrialsResponse> exact = client_->ListTrials(request);
  ASSERT_TRUE(exact.ok()) << exact.status();
  EXPECT_EQ(exact->trials_size(), 25);
  EXPECT_EQ(exact->next_page_token(), "");

  // Tokens the server did not issue, and page sizes and states outside the allowed values.
  for (const char* token : {"garbage", "t", "t-3", "12"}) {
    SCOPED_TRACE(token);
    request.set_page_token(token);
    EXPECT_THAT(client_->ListTrials(request).status(),
                StatusIs(absl::StatusCode::kInvalidArgument, HasSubstr("page_token")));
  }
  request.clear_page_token();
  request.set_page_size(1001);
  EXPECT_THAT(client_->ListTrials(request).status(),
              StatusIs(absl::StatusCode::kInvalidArgument, HasSubstr("page_size")));
  request.set_page_size(-1);
  EXPECT_THAT(client_->ListTrials(request).status(),
              StatusIs(absl::StatusCode::kInvalidArgument, HasSubstr("page_size")));
  request.set_page_size(10);
  request.GetReflection()->SetEnumValue(&request, request.GetDescriptor()->FindFieldByName("state"),
                                        9);
  EXPECT_THAT(client_->ListTrials(request).status(),
              StatusIs(absl::StatusCode::kInvalidArgument, HasSubstr("state")));
}

// ---- The distribution's history ----

TEST_F(ServiceTest, ListGenerationsShowsEveryUpdateInUserUnitsPageByPage) {
  Create(MixedDesign("history"));
  const int64_t start_ms = absl::ToUnixMillis(absl::Now());
  // Eight sequential generations of λ = 6: ask a cohort, tell it, repeat (staleness 0 throughout).
  for (int g = 0; g < 8; ++g) {
    const v1::AskResponse asked = AskOk("history", 6);
    std::vector<v1::Report> reports;
    for (const v1::Trial& t : asked.trials()) reports.push_back(ScoreReport(t.number(), MixedScore(t.candidate())));
    EXPECT_EQ(TellOk("history", reports).generation(), g + 1);
  }
  const int64_t end_ms = absl::ToUnixMillis(absl::Now());
  absl::StatusOr<std::vector<v1::GenerationView>> all = client_->ListAllGenerations("history");
  ASSERT_TRUE(all.ok()) << all.status();
  ASSERT_EQ(all->size(), 8u);
  for (size_t i = 0; i < all->size(); ++i) {
    const v1::GenerationView& g = (*all)[i];
    SCOPED_TRACE(g.generation());
    EXPECT_EQ(g.generation(), static_cast<int64_t>(i + 1));
    EXPECT_EQ(g.epoch(), 0);
    EXPECT_EQ(g.population_size(), 6);
    EXPECT_EQ(g.cohort_size(), 6);
    EXPECT_EQ(g.mean_staleness(), 0);
    EXPECT_EQ(g.max_staleness(), 0);
    EXPECT_GT(g.step_size(), 0);
    EXPECT_GE(g.axis_ratio(), 1);
    EXPECT_GE(g.best_trial(), 1);
    EXPECT_LE(g.best_trial(), 6 * g.generation());
    EXPECT_GE(g.recorded_at_unix_ms(), start_ms);
    EXPECT_LE(g.recorded_at_unix_ms(), end_ms);
    ASSERT_EQ(g.marginals_size(), 5);
    EXPECT_EQ(g.marginals(0).parameter(), "x");
    EXPECT_EQ(g.marginals(0).low(), -5);
    EXPECT_EQ(g.marginals(0).high(), 5);
    EXPECT_GT(g.marginals(0).spread(), 0);
    EXPECT_GT(g.marginals(1).mean(), 0);  // a log parameter's mean is a value of the range
    EXPECT_EQ(g.marginals(2).low(), 1);
    EXPECT_EQ(g.marginals(3).options_size(), 3);
    EXPECT_EQ(g.marginals(4).probabilities_size(), 1);
  }
  // The last update is the current distribution: its view equals the status's, field for field.
  const v1::StatusSummary status = Get("history").status();
  const v1::GenerationView& last = all->back();
  EXPECT_EQ(last.step_size(), status.step_size());
  EXPECT_EQ(last.axis_ratio(), status.axis_ratio());
  EXPECT_EQ(last.best_trial(), status.best().number());
  ASSERT_EQ(status.marginals_size(), last.marginals_size());
  for (int i = 0; i < status.marginals_size(); ++i) {
    EXPECT_EQ(DeterministicBytes(status.marginals(i)), DeterministicBytes(last.marginals(i))) << i;
  }

  // Pages of 3: 3 + 3 + 2, the same views in the same order.
  v1::ListGenerationsRequest request;
  request.set_campaign("history");
  request.set_page_size(3);
  std::vector<int> page_sizes;
  std::vector<std::string> paged;
  for (int page = 0; page < 10; ++page) {
    absl::StatusOr<v1::ListGenerationsResponse> response = client_->ListGenerations(request);
    ASSERT_TRUE(response.ok()) << response.status();
    page_sizes.push_back(response->generations_size());
    for (const v1::GenerationView& g : response->generations()) paged.push_back(DeterministicBytes(g));
    if (response->next_page_token().empty()) break;
    request.set_page_token(response->next_page_token());
  }
  EXPECT_THAT(page_sizes, ElementsAre(3, 3, 2));
  ASSERT_EQ(paged.size(), 8u);
  for (size_t i = 0; i < paged.size(); ++i) EXPECT_EQ(paged[i], DeterministicBytes((*all)[i])) << i;

  // A page ending at the last generation has no next page; refused tokens and sizes; unknown campaign.
  request.clear_page_token();
  request.set_page_size(8);
  absl::StatusOr<v1::ListGenerationsResponse> exact = client_->ListGenerations(request);
  ASSERT_TRUE(exact.ok()) << exact.status();
  EXPECT_EQ(exact->generations_size(), 8);
  EXPECT_EQ(exact->next_page_token(), "");
  for (const char* token : {"garbage", "g", "g-1", "t3", "3"}) {
    SCOPED_TRACE(token);
    request.set_page_token(token);
    EXPECT_THAT(client_->ListGenerations(request).status(),
                StatusIs(absl::StatusCode::kInvalidArgument, HasSubstr("page_token")));
  }
  request.clear_page_token();
  request.set_page_size(1001);
  EXPECT_THAT(client_->ListGenerations(request).status(),
              StatusIs(absl::StatusCode::kInvalidArgument, AllOf(HasSubstr("page_size"), HasSubstr("1..1000"))));
  request.set_page_size(0);
  request.set_campaign("nowhere");
  EXPECT_THAT(client_->ListGenerations(request).status(),
              StatusIs(absl::StatusCode::kNotFound, HasSubstr("nowhere")));

  // The history is what the store holds: a restarted server lists the same views.
  client_.reset();
  server_->Stop();
  ASSERT_TRUE(server_->Start().ok());
  client_ = server_->NewClient();
  absl::StatusOr<std::vector<v1::GenerationView>> again = client_->ListAllGenerations("history");
  ASSERT_TRUE(again.ok()) << again.status();
  ASSERT_EQ(again->size(), all->size());
  for (size_t i = 0; i < all->size(); ++i) {
    EXPECT_EQ(DeterministicBytes((*again)[i]), DeterministicBytes((*all)[i])) << i;
  }
}

TEST_F(ServiceTest, ListGenerationsShowsTheStalenessOfConsumedOutcomes) {
  v1::CampaignDesign design = ScoredDesign("stale", {Real("a", 0, 1), Real("b", 0, 1)});
  design.set_population_size(2);
  design.set_staleness_limit(5);
  Create(design);
  // Trial 1 is held back from generation 0; trials 2 and 3 make generation 1 (never more than λ = 2
  // out, so λ stays 2). Then trial 4 (from generation 1) and trial 1 (staleness 1) make generation 2.
  ASSERT_EQ(AskOk("stale", 1).trials(0).number(), 1);
  for (int k = 0; k < 2; ++k) {
    const v1::AskResponse asked = AskOk("stale", 1);
    TellOk("stale", {ScoreReport(asked.trials(0).number(), 2.0 + k)});
  }
  const v1::AskResponse fourth = AskOk("stale", 1);
  ASSERT_EQ(fourth.trials(0).generation(), 1);
  TellOk("stale", {ScoreReport(4, 4.0), ScoreReport(1, 0.1)});
  absl::StatusOr<std::vector<v1::GenerationView>> all = client_->ListAllGenerations("stale");
  ASSERT_TRUE(all.ok()) << all.status();
  ASSERT_EQ(all->size(), 2u);
  EXPECT_EQ((*all)[0].mean_staleness(), 0);
  EXPECT_EQ((*all)[0].max_staleness(), 0);
  EXPECT_EQ((*all)[0].best_trial(), 2);
  EXPECT_EQ((*all)[1].cohort_size(), 2);
  EXPECT_EQ((*all)[1].mean_staleness(), 0.5);
  EXPECT_EQ((*all)[1].max_staleness(), 1);
  EXPECT_EQ((*all)[1].best_trial(), 1);  // score 0.1
}

// ---- Watch ----

TEST_F(ServiceTest, WatchSendsTheCurrentViewThenOneMessagePerChangeUntilCancelled) {
  Create(ScoredDesign("watched", {Real("x", 0, 1)}));
  AskOk("watched", 2);
  const v1::CampaignView current = Get("watched");

  grpc::ClientContext context;
  SetDeadline(context);  // a stream that ignored the cancel would end here, with another code
  v1::WatchRequest request;
  request.set_campaign("watched");
  std::unique_ptr<grpc::ClientReader<v1::CampaignView>> reader =
      client_->stub().Watch(&context, request);

  v1::CampaignView view;
  ASSERT_TRUE(reader->Read(&view));
  // The current view, design included.
  EXPECT_EQ(WithoutActivity(view).DebugString(), WithoutActivity(current).DebugString());

  TellOk("watched", {ScoreReport(1, 0.5)});
  ASSERT_TRUE(reader->Read(&view));
  EXPECT_EQ(view.name(), "watched");
  EXPECT_EQ(view.status().reported(), 1);
  EXPECT_EQ(view.status().leased(), 1);

  // Cancel while a Read is blocked on another thread: the stream ends promptly, CANCELLED.
  std::atomic<int> extra{0};
  absl::Notification finished;
  std::thread reading([&] {
    v1::CampaignView more;
    while (reader->Read(&more)) ++extra;
    finished.Notify();
  });
  absl::SleepFor(absl::Milliseconds(300));
  const absl::Time cancelled_at = absl::Now();
  context.TryCancel();
  EXPECT_TRUE(finished.WaitForNotificationWithTimeout(kCallTimeout));
  reading.join();
  EXPECT_LT(absl::Now() - cancelled_at, absl::Seconds(2));
  EXPECT_EQ(extra.load(), 0);
  EXPECT_EQ(reader->Finish().error_code(), grpc::StatusCode::CANCELLED);
}

TEST_F(ServiceTest, WatchEndsWhenTheCampaignIsDone) {
  Create(ScoredDesign("finishing", {Real("x", 0, 1)}));
  absl::Mutex mu;
  std::vector<v1::CampaignView> views;
  absl::Status watch_status = absl::UnknownError("watch did not return");
  absl::Notification first_view, returned;
  std::thread watching([&] {
    absl::Status s = client_->Watch("finishing", [&](const v1::CampaignView& v) {
      absl::MutexLock lock(&mu);
      views.push_back(v);
      if (!first_view.HasBeenNotified()) first_view.Notify();
      return views.size() < 10;  // bounds the stream should the campaign never end
    });
    absl::MutexLock lock(&mu);
    watch_status = s;
    returned.Notify();
  });
  ASSERT_TRUE(first_view.WaitForNotificationWithTimeout(kCallTimeout));
  ASSERT_TRUE(client_->SetPhase("finishing", v1::PHASE_COMMAND_FINISH).ok());
  const bool ended = returned.WaitForNotificationWithTimeout(kCallTimeout);
  watching.join();  // the callback's bound ends it in any case
  EXPECT_TRUE(ended);
  absl::MutexLock lock(&mu);
  EXPECT_TRUE(watch_status.ok()) << watch_status;
  ASSERT_GE(views.size(), 2u);
  EXPECT_LT(views.size(), 10u);
  EXPECT_EQ(views.front().status().phase(), v1::CAMPAIGN_PHASE_OPEN);
  EXPECT_EQ(views.back().status().phase(), v1::CAMPAIGN_PHASE_DONE);
  EXPECT_EQ(views.back().status().reason(), v1::DONE_REASON_STOPPED);
}

// "One message after every change": the change that ends a campaign is one change, so its view comes
// once, and a campaign that is done already has nothing to send after its current view.
TEST_F(ServiceTest, WatchSendsTheDoneViewOnce) {
  Create(ScoredDesign("ending", {Real("x", 0, 1)}));
  grpc::ClientContext context;
  SetDeadline(context);
  v1::WatchRequest request;
  request.set_campaign("ending");
  std::unique_ptr<grpc::ClientReader<v1::CampaignView>> reader =
      client_->stub().Watch(&context, request);
  v1::CampaignView view;
  ASSERT_TRUE(reader->Read(&view));
  ASSERT_TRUE(client_->SetPhase("ending", v1::PHASE_COMMAND_FINISH).ok());
  std::vector<v1::CampaignPhase> phases;
  while (reader->Read(&view)) phases.push_back(view.status().phase());
  EXPECT_TRUE(reader->Finish().ok());
  EXPECT_THAT(phases, ElementsAre(v1::CAMPAIGN_PHASE_DONE));

  grpc::ClientContext done_context;
  SetDeadline(done_context);
  reader = client_->stub().Watch(&done_context, request);
  phases.clear();
  while (reader->Read(&view)) phases.push_back(view.status().phase());
  EXPECT_TRUE(reader->Finish().ok());
  EXPECT_THAT(phases, ElementsAre(v1::CAMPAIGN_PHASE_DONE));
}

TEST_F(ServiceTest, WatchOfAnUnknownCampaignIsNotFound) {
  EXPECT_THAT(client_->Watch("nowhere", [](const v1::CampaignView&) { return true; }),
              StatusIs(absl::StatusCode::kNotFound, HasSubstr("nowhere")));
}

// ---- Restart ----

// Asks `count` trials on both servers and checks that they are the same trials, bit for bit.
std::vector<v1::Trial> AskBoth(client::Client& a, client::Client& b, const std::string& campaign,
                               int count) {
  absl::StatusOr<v1::AskResponse> from_a = a.Ask(campaign, count, "w", 600);
  absl::StatusOr<v1::AskResponse> from_b = b.Ask(campaign, count, "w", 600);
  EXPECT_TRUE(from_a.ok()) << from_a.status();
  EXPECT_TRUE(from_b.ok()) << from_b.status();
  if (!from_a.ok() || !from_b.ok()) return {};
  EXPECT_EQ(from_a->trials_size(), count);
  EXPECT_EQ(from_b->trials_size(), count);
  if (from_a->trials_size() != from_b->trials_size()) return {};
  std::vector<v1::Trial> trials;
  for (int i = 0; i < from_a->trials_size(); ++i) {
    const v1::Trial& ta = from_a->trials(i);
    const v1::Trial& tb = from_b->trials(i);
    EXPECT_EQ(ta.number(), tb.number());
    EXPECT_EQ(ta.generation(), tb.generation());
    EXPECT_EQ(DeterministicBytes(ta.candidate()), DeterministicBytes(tb.candidate()))
        << "trial " << ta.number() << ": " << ta.candidate().ShortDebugString() << " vs "
        << tb.candidate().ShortDebugString();
    trials.push_back(ta);
  }
  return trials;
}

void TellBothReports(client::Client& a, client::Client& b, const std::string& campaign,
                     const std::vector<v1::Report>& reports) {
  absl::StatusOr<v1::TellResponse> to_a = a.Tell(campaign, reports, "w");
  absl::StatusOr<v1::TellResponse> to_b = b.Tell(campaign, reports, "w");
  ASSERT_TRUE(to_a.ok()) << to_a.status();
  ASSERT_TRUE(to_b.ok()) << to_b.status();
  EXPECT_EQ(to_a->generation(), to_b->generation());
  for (const v1::ReportResult& r : to_a->results()) EXPECT_EQ(r.code(), 0) << r.message();
  for (const v1::ReportResult& r : to_b->results()) EXPECT_EQ(r.code(), 0) << r.message();
}

void TellBoth(client::Client& a, client::Client& b, const std::string& campaign,
              const std::vector<v1::Trial>& trials) {
  std::vector<v1::Report> reports;
  for (const v1::Trial& t : trials)
    reports.push_back(ScoreReport(t.number(), Sphere(t.candidate())));
  TellBothReports(a, b, campaign, reports);
}

absl::StatusOr<v1::CampaignView> CreateWithRequestId(client::Client& c, const v1::CampaignDesign& design,
                                                  const std::string& request_id) {
  v1::CreateCampaignRequest request;
  *request.mutable_design() = design;
  request.set_request_id(request_id);
  grpc::ClientContext context;
  SetDeadline(context);
  v1::CampaignView response;
  const grpc::Status s = c.stub().CreateCampaign(&context, request, &response);
  if (!s.ok())
    return absl::Status(static_cast<absl::StatusCode>(s.error_code()), s.error_message());
  return response;
}

absl::StatusOr<v1::AskResponse> AskWithRequestId(client::Client& c, const std::string& campaign,
                                                 int count, const std::string& request_id) {
  v1::AskRequest request;
  request.set_campaign(campaign);
  request.set_count(count);
  request.set_worker("w");
  request.set_lease_seconds(600);
  request.set_request_id(request_id);
  grpc::ClientContext context;
  SetDeadline(context);
  v1::AskResponse response;
  const grpc::Status s = c.stub().Ask(&context, request, &response);
  if (!s.ok())
    return absl::Status(static_cast<absl::StatusCode>(s.error_code()), s.error_message());
  return response;
}

// The status fields that do not depend on when the trials were asked.
std::string TimelessStatus(const v1::StatusSummary& s) {
  v1::StatusSummary copy = s;
  copy.clear_best();
  testing::ClearActivity(&copy);
  return DeterministicBytes(copy);
}

TEST(ServiceRestartTest, RestartedServerContinuesBitIdentically) {
  const std::string path_a = TempDbPath("restart_a");
  const std::string path_b = TempDbPath("restart_b");
  RemoveDb(path_a);
  RemoveDb(path_b);
  {
    LoopbackServer a(path_a);
    LoopbackServer b(path_b);
    ASSERT_TRUE(a.Start().ok());
    ASSERT_TRUE(b.Start().ok());
    std::unique_ptr<client::Client> ca = a.NewClient();
    std::unique_ptr<client::Client> cb = b.NewClient();
    const v1::CampaignDesign design = SphereDesign("sphere");
    absl::StatusOr<v1::CampaignView> created_a = CreateWithRequestId(*ca, design, "create-sphere");
    absl::StatusOr<v1::CampaignView> created_b = CreateWithRequestId(*cb, design, "create-sphere");
    ASSERT_TRUE(created_a.ok()) << created_a.status();
    ASSERT_TRUE(created_b.ok()) << created_b.status();
    const int lambda = created_a->status().population_size();
    ASSERT_EQ(lambda, 7);  // 4 + floor(3 ln 3)

    // Four generations, then the middle of the fifth: four asked, of them one scored, one void, one
    // infeasible and one still leased; and an ask with a request id, to be retried after the
    // restart.
    for (int g = 0; g < 4; ++g) {
      const std::vector<v1::Trial> trials = AskBoth(*ca, *cb, "sphere", lambda);
      ASSERT_EQ(trials.size(), static_cast<size_t>(lambda));
      TellBoth(*ca, *cb, "sphere", trials);
    }
    const std::vector<v1::Trial> partial = AskBoth(*ca, *cb, "sphere", 4);
    ASSERT_EQ(partial.size(), 4u);
    TellBothReports(*ca, *cb, "sphere",
                    {ScoreReport(partial[0].number(), Sphere(partial[0].candidate()), "scored"),
                     VoidReport(partial[1].number(), "never ran"),
                     InfeasibleReport(partial[2].number(), "out of spec \xc2\xbd \xc2\xb5m")});
    absl::StatusOr<v1::AskResponse> before_a = AskWithRequestId(*ca, "sphere", 2, "ask-before");
    absl::StatusOr<v1::AskResponse> before_b = AskWithRequestId(*cb, "sphere", 2, "ask-before");
    ASSERT_TRUE(before_a.ok()) << before_a.status();
    ASSERT_TRUE(before_b.ok()) << before_b.status();
    ASSERT_EQ(Numbers(*before_a), Numbers(*before_b));
    for (int i = 0; i < before_a->trials_size(); ++i) {
      EXPECT_EQ(DeterministicBytes(before_a->trials(i).candidate()),
                DeterministicBytes(before_b->trials(i).candidate()));
    }

    absl::StatusOr<v1::CampaignView> view_before = cb->GetCampaign("sphere");
    absl::StatusOr<std::vector<v1::Trial>> trials_before = cb->ListAllTrials("sphere");
    ASSERT_TRUE(view_before.ok()) << view_before.status();
    ASSERT_TRUE(trials_before.ok()) << trials_before.status();
    EXPECT_EQ(view_before->status().generation(), 4);
    EXPECT_EQ(trials_before->size(), static_cast<size_t>(4 * lambda + 4 + 2));
    EXPECT_EQ(view_before->status().voided(), 1);
    EXPECT_EQ(view_before->status().pending(), 2);
    EXPECT_EQ(view_before->status().leased(), 3);

    // Restart b: server, registry and store go; the same file is opened again.
    cb.reset();
    b.Stop();
    ASSERT_TRUE(b.Start().ok());
    cb = b.NewClient();

    // b shows exactly what it showed before, and what a shows.
    absl::StatusOr<v1::CampaignView> view_after = cb->GetCampaign("sphere");
    absl::StatusOr<std::vector<v1::Trial>> trials_after = cb->ListAllTrials("sphere");
    absl::StatusOr<v1::CampaignView> view_a = ca->GetCampaign("sphere");
    ASSERT_TRUE(view_after.ok()) << view_after.status();
    ASSERT_TRUE(trials_after.ok()) << trials_after.status();
    ASSERT_TRUE(view_a.ok()) << view_a.status();
    EXPECT_EQ(DeterministicBytes(WithoutActivity(*view_after)), DeterministicBytes(WithoutActivity(*view_before)));
    ASSERT_EQ(trials_after->size(), trials_before->size());
    for (size_t i = 0; i < trials_after->size(); ++i) {
      EXPECT_EQ(DeterministicBytes((*trials_after)[i]), DeterministicBytes((*trials_before)[i]))
          << (*trials_after)[i].ShortDebugString() << " vs "
          << (*trials_before)[i].ShortDebugString();
    }
    EXPECT_EQ(view_after->status().generation(), view_a->status().generation());
    EXPECT_EQ(StateTotal(view_after->status()), StateTotal(view_a->status()));
    EXPECT_EQ(TimelessStatus(view_after->status()), TimelessStatus(view_a->status()));

    // Retries after the restart: the ask returns the trials it returned before, the create the
    // campaign it created.
    absl::StatusOr<v1::AskResponse> retried = AskWithRequestId(*cb, "sphere", 2, "ask-before");
    ASSERT_TRUE(retried.ok()) << retried.status();
    EXPECT_EQ(Numbers(*retried), Numbers(*before_b));
    absl::StatusOr<v1::CampaignView> recreated = CreateWithRequestId(*cb, design, "create-sphere");
    ASSERT_TRUE(recreated.ok()) << recreated.status();
    EXPECT_EQ(recreated->status().generation(), 4);
    EXPECT_THAT(CreateWithRequestId(*cb, design, "create-other").status(),
                StatusIs(absl::StatusCode::kAlreadyExists, HasSubstr("'sphere'")));

    // The next ask gives bit-identical candidates on both; the trial leased before the restart
    // can be told after it.
    std::vector<v1::Trial> rest = AskBoth(*ca, *cb, "sphere", lambda - 5);
    ASSERT_EQ(rest.size(), static_cast<size_t>(lambda - 5));
    rest.push_back(partial[3]);
    for (const v1::Trial& t : before_a->trials()) rest.push_back(t);
    TellBoth(*ca, *cb, "sphere", rest);
    view_after = cb->GetCampaign("sphere");
    ASSERT_TRUE(view_after.ok()) << view_after.status();
    EXPECT_EQ(view_after->status().generation(), 5);

    // And it keeps converging, still in step with the server that never restarted.
    double best = std::numeric_limits<double>::infinity();
    int generation = 5;
    for (; generation < 150 && best > 1e-6; ++generation) {
      const std::vector<v1::Trial> trials = AskBoth(*ca, *cb, "sphere", lambda);
      ASSERT_EQ(trials.size(), static_cast<size_t>(lambda));
      for (const v1::Trial& t : trials) best = std::min(best, Sphere(t.candidate()));
      TellBoth(*ca, *cb, "sphere", trials);
      if (::testing::Test::HasFailure()) break;
    }
    EXPECT_LT(best, 1e-6) << "after " << generation << " generations";
    view_a = ca->GetCampaign("sphere");
    view_after = cb->GetCampaign("sphere");
    ASSERT_TRUE(view_a.ok()) << view_a.status();
    ASSERT_TRUE(view_after.ok()) << view_after.status();
    EXPECT_EQ(TimelessStatus(view_after->status()), TimelessStatus(view_a->status()));
    EXPECT_EQ(view_after->status().best().outcome().score(), best);
    EXPECT_LT(view_after->status().step_size(), view_before->status().step_size());
  }
  RemoveDb(path_a);
  RemoveDb(path_b);
}

// ---- Leases ----

// noise: replicates:2 over the wire: after a trial is reported, the next one handed out measures its
// candidate again (same values, replicate_of set); the original waits (awaiting_replicates) until the
// repeat is in, and the status counts it.
TEST_F(ServiceTest, ReplicatesAreHandedOutAsTrialsOfTheirOwn) {
  v1::CampaignDesign design = ScoredDesign("repeated", {Real("x", 0, 1), Real("y", 0, 1)});
  design.set_noise("replicates:2");
  Create(design);
  const v1::AskResponse first = AskOk("repeated", 1);
  ASSERT_EQ(first.trials_size(), 1);
  EXPECT_EQ(first.trials(0).replicate_of(), 0);
  TellOk("repeated", {ScoreReport(1, 0.5)});
  EXPECT_EQ(Get("repeated").status().awaiting_replicates(), 1);
  const v1::AskResponse second = AskOk("repeated", 2);
  ASSERT_EQ(second.trials_size(), 2);
  EXPECT_EQ(second.trials(0).replicate_of(), 1);
  EXPECT_EQ(second.trials(0).candidate().DebugString(), first.trials(0).candidate().DebugString());
  EXPECT_EQ(second.trials(1).replicate_of(), 0);  // nothing else waits: a new candidate
  TellOk("repeated", {ScoreReport(2, 0.7)});
  const v1::StatusSummary status = Get("repeated").status();
  EXPECT_EQ(status.awaiting_replicates(), 1);  // the replicate, waiting for its original's cohort
  EXPECT_EQ(status.pending(), 1);              // the original, now with both measurements
}

TEST_F(ServiceTest, LapsedTrialsTakeLateReports) {
  Create(ScoredDesign("swept", {Real("x", 0, 1)}));
  Create(ScoredDesign("requested", {Real("x", 0, 1)}));
  const int64_t asked_at_ms = absl::ToUnixMillis(absl::Now());
  const v1::AskResponse requested = AskOk("requested", 2, 1.0);
  const v1::AskResponse swept = AskOk("swept", 2, 1.0);
  ASSERT_EQ(requested.trials_size(), 2);
  ASSERT_EQ(swept.trials_size(), 2);
  EXPECT_NEAR(static_cast<double>(requested.trials(0).lease_deadline_unix_ms() - asked_at_ms),
              1000.0, 500.0);
  absl::SleepFor(absl::Milliseconds(1500));

  // A request lapses what ran out before it does anything else.
  ASSERT_EQ(AskOk("requested", 1).trials_size(), 1);
  v1::StatusSummary status = Get("requested").status();
  EXPECT_EQ(status.lapsed(), 2);
  EXPECT_EQ(status.leased(), 1);
  EXPECT_THAT(Numbers(AllTrials("requested", v1::TRIAL_STATE_LAPSED)), ElementsAre(1, 2));

  // With no request in between, the registry's sweep does it.
  absl::StatusOr<std::shared_ptr<service::CampaignHost>> host = server_->registry().Find("swept");
  ASSERT_TRUE(host.ok()) << host.status();
  absl::StatusOr<int> lapsed = (*host)->Sweep(absl::Now());
  ASSERT_TRUE(lapsed.ok()) << lapsed.status();
  EXPECT_EQ(*lapsed, 2);
  EXPECT_EQ(Get("swept").status().lapsed(), 2);
  EXPECT_THAT(Numbers(AllTrials("swept", v1::TRIAL_STATE_LAPSED)), ElementsAre(1, 2));

  // Renewing a lapsed trial leases it again: its report is then on time.
  absl::StatusOr<v1::RenewResponse> renewed = client_->Renew("swept", {2}, "worker-1", 60);
  ASSERT_TRUE(renewed.ok()) << renewed.status();
  EXPECT_EQ(renewed->trials(0).state(), v1::TRIAL_STATE_LEASED);
  EXPECT_GT(renewed->trials(0).lease_deadline_unix_ms(), absl::ToUnixMillis(absl::Now()));
  EXPECT_FALSE(TellOk("swept", {ScoreReport(2, 0.75)}).results(0).late());

  // Late reports are stored, marked late and counted.
  v1::TellResponse told =
      TellOk("requested", {ScoreReport(1, 0.25, "late but fine"), VoidReport(2)});
  EXPECT_EQ(told.results(0).code(), 0) << told.results(0).message();
  EXPECT_TRUE(told.results(0).late());
  EXPECT_TRUE(told.results(1).late());
  told = TellOk("swept", {ScoreReport(1, 0.5)});
  EXPECT_TRUE(told.results(0).late());

  const std::vector<v1::Trial> trials = AllTrials("requested");
  ASSERT_EQ(trials.size(), 3u);
  EXPECT_EQ(trials[0].state(), v1::TRIAL_STATE_REPORTED);
  EXPECT_TRUE(trials[0].late());
  EXPECT_EQ(trials[0].outcome().score(), 0.25);
  EXPECT_EQ(trials[0].outcome().note(), "late but fine");
  EXPECT_EQ(trials[0].use(), v1::OUTCOME_USE_PENDING);  // fresh enough to be used
  EXPECT_EQ(trials[1].state(), v1::TRIAL_STATE_VOIDED);
  EXPECT_TRUE(trials[1].late());
  EXPECT_FALSE(trials[2].late());
  status = Get("requested").status();
  EXPECT_EQ(status.late(), 2);
  EXPECT_EQ(status.lapsed(), 0);
  EXPECT_EQ(status.reported(), 1);
  EXPECT_EQ(status.voided(), 1);
  EXPECT_EQ(status.leased(), 1);
  status = Get("swept").status();
  EXPECT_EQ(status.late(), 1);
  EXPECT_EQ(status.lapsed(), 0);
  EXPECT_EQ(status.reported(), 2);

  // The same late report again is a duplicate, still late.
  told = TellOk("requested", {ScoreReport(1, 0.25, "late but fine")});
  EXPECT_EQ(told.results(0).code(), 0);
  EXPECT_TRUE(told.results(0).duplicate());
  EXPECT_TRUE(told.results(0).late());
  EXPECT_EQ(Get("requested").status().late(), 2);
  ExpectSameAfterRestart({"requested", "swept"});
}

// ---- Refused input ----

TEST_F(ServiceTest, UnknownCampaignIsNotFound) {
  Create(ScoredDesign("known", {Real("x", 0, 1)}));
  const std::string before = StoredState("known");
  const auto not_found = StatusIs(absl::StatusCode::kNotFound, HasSubstr("'unknown'"));
  EXPECT_THAT(client_->GetCampaign("unknown").status(), not_found);
  EXPECT_THAT(client_->Ask("unknown", 1, "w").status(), not_found);
  EXPECT_THAT(client_->Tell("unknown", {ScoreReport(1, 1.0)}, "w").status(), not_found);
  EXPECT_THAT(client_->Renew("unknown", {1}, "w").status(), not_found);
  EXPECT_THAT(client_->ListAllTrials("unknown").status(), not_found);
  EXPECT_THAT(client_->SetPhase("unknown", v1::PHASE_COMMAND_PAUSE).status(), not_found);
  EXPECT_EQ(StoredState("known"), before);
  absl::StatusOr<v1::ListCampaignsResponse> list = client_->ListCampaigns();
  ASSERT_TRUE(list.ok()) << list.status();
  ASSERT_EQ(list->campaigns_size(), 1);
  EXPECT_EQ(list->campaigns(0).name(), "known");
}

TEST_F(ServiceTest, UnknownTrialIsAPerReportNotFound) {
  Create(ScoredDesign("few", {Real("x", 0, 1)}));
  AskOk("few", 2);
  const std::string before = StoredState("few");
  const v1::TellResponse told = TellOk("few", {ScoreReport(999, 1.0), ScoreReport(0, 1.0)});
  EXPECT_EQ(told.results(0).trial(), 999);
  EXPECT_EQ(told.results(0).code(), static_cast<int>(absl::StatusCode::kNotFound));
  EXPECT_THAT(told.results(0).message(), AllOf(HasSubstr("999"), HasSubstr("1..2")));
  EXPECT_EQ(told.results(1).code(), static_cast<int>(absl::StatusCode::kNotFound));
  EXPECT_EQ(StoredState("few"), before);

  // Unknown trials do not spoil the known ones in the same call.
  const v1::TellResponse mixed = TellOk("few", {ScoreReport(7, 1.0), ScoreReport(2, 3.0)});
  EXPECT_EQ(mixed.results(0).code(), static_cast<int>(absl::StatusCode::kNotFound));
  EXPECT_EQ(mixed.results(1).code(), 0);
  EXPECT_EQ(AllTrials("few")[1].state(), v1::TRIAL_STATE_REPORTED);
  ExpectSameAfterRestart({"few"});
}

struct BadDesignCase {
  const char* what;
  std::function<void(v1::CampaignDesign&)> mutate;
  std::vector<std::string> message_parts;
};

TEST_F(ServiceTest, MalformedDesignsAreRefusedNamingTheField) {
  auto set_enum = [](google::protobuf::Message& m, const char* field, int value) {
    m.GetReflection()->SetEnumValue(&m, m.GetDescriptor()->FindFieldByName(field), value);
  };
  const std::vector<BadDesignCase> cases = {
      {"real low == high",
       [](v1::CampaignDesign& d) { d.mutable_parameters(0)->mutable_real()->set_low(5); },
       {"design.parameters[0].real.low", "less than real.high (5), got 5", "'x'"}},
      {"real low > high",
       [](v1::CampaignDesign& d) { d.mutable_parameters(0)->mutable_real()->set_low(6); },
       {"design.parameters[0].real.low", "less than real.high (5), got 6"}},
      {"integer low == high",
       [](v1::CampaignDesign& d) { *d.add_parameters() = Integer("n", 3, 3); },
       {"design.parameters[1].integer.low", "less than integer.high (3)", "'n'"}},
      {"log scale with low 0",
       [](v1::CampaignDesign& d) { *d.add_parameters() = Real("rate", 0, 1, true); },
       {"design.parameters[1].real.low", "> 0 on a log scale", "'rate'"}},
      {"log scale with low < 0",
       [](v1::CampaignDesign& d) { *d.add_parameters() = Real("rate", -1, 1, true); },
       {"design.parameters[1].real.low", "> 0 on a log scale", "got -1"}},
      {"duplicate parameter names",
       [](v1::CampaignDesign& d) { *d.add_parameters() = Flag("x"); },
       {"design.parameters[1].name", "'x' appears twice"}},
      {"empty categorical",
       [](v1::CampaignDesign& d) { *d.add_parameters() = Categorical("solver", {}); },
       {"design.parameters[1].categorical.options", "2..1000 distinct options, got 0"}},
      {"grade scale with one label",
       [](v1::CampaignDesign& d) { d.mutable_objective()->mutable_grade_scale()->add_labels("ok"); },
       {"design.objective.grade_scale.labels", "2..1000 distinct labels", "got 1"}},
      {"unknown direction",
       [&](v1::CampaignDesign& d) { set_enum(*d.mutable_objective(), "direction", 7); },
       {"design.objective.direction", "DIRECTION_LOWER_IS_BETTER or DIRECTION_HIGHER_IS_BETTER", "7"}},
      {"unknown gaussian model",
       [&](v1::CampaignDesign& d) { set_enum(d, "gaussian_model", 9); },
       {"design.gaussian_model", "GAUSSIAN_MODEL_FULL", "got 9"}},
      {"no parameters", [](v1::CampaignDesign& d) { d.clear_parameters(); }, {"design.parameters", "got 0"}},
      {"no objective", [](v1::CampaignDesign& d) { d.clear_objective(); }, {"design.objective", "required"}},
      {"name with a space",
       [](v1::CampaignDesign& d) { d.set_name("my campaign"); },
       {"design.name", "letters, digits"}},
      {"name too long",
       [](v1::CampaignDesign& d) { d.set_name(std::string(129, 'n')); },
       {"design.name", "128"}},
      {"parameter name with a dot",
       [](v1::CampaignDesign& d) { d.mutable_parameters(0)->set_name("x.y"); },
       {"design.parameters[0].name", "'x.y'"}},
      {"parameter without a kind",
       [](v1::CampaignDesign& d) { d.mutable_parameters(0)->clear_kind(); },
       {"design.parameters[0]", "real, integer, categorical, flag", "'x'"}},
      {"duplicate option",
       [](v1::CampaignDesign& d) {
         *d.add_parameters() = Categorical("gas", {"ar", "n2", "ar"});
       },
       {"design.parameters[1].categorical.options[2]", "'ar' appears twice (also options[0])"}},
      {"duplicate grade label",
       [](v1::CampaignDesign& d) {
         d.mutable_objective()->mutable_grade_scale()->add_labels("ok");
         d.mutable_objective()->mutable_grade_scale()->add_labels("ok");
       },
       {"design.objective.grade_scale.labels[1]", "'ok' appears twice"}},
      {"population size 1",
       [](v1::CampaignDesign& d) { d.set_population_size(1); },
       {"design.population_size", "0 (the default) or in 2..", "got 1"}},
      {"initial spread above 1",
       [](v1::CampaignDesign& d) { d.set_initial_spread(2); },
       {"design.initial_spread", "(0, 1]"}},
      {"negative staleness limit",
       [](v1::CampaignDesign& d) { d.set_staleness_limit(-1); },
       {"design.staleness_limit", ">= 0"}},
      {"negative trial budget",
       [](v1::CampaignDesign& d) { d.set_trial_budget(-3); },
       {"design.trial_budget", ">= 0"}},
      {"negative lease",
       [](v1::CampaignDesign& d) { d.set_lease_seconds(-1); },
       {"design.lease_seconds", "(0, 2592000]", "got -1"}},
      {"NaN target",
       [](v1::CampaignDesign& d) { d.set_target(std::numeric_limits<double>::quiet_NaN()); },
       {"design.target", "finite"}},
      {"score target on a graded campaign",
       [](v1::CampaignDesign& d) {
         d.mutable_objective()->mutable_grade_scale()->add_labels("poor");
         d.mutable_objective()->mutable_grade_scale()->add_labels("good");
         d.set_target(1.0);
       },
       {"design.target", "target_grade"}},
      {"target grade off the scale",
       [](v1::CampaignDesign& d) {
         d.mutable_objective()->mutable_grade_scale()->add_labels("poor");
         d.mutable_objective()->mutable_grade_scale()->add_labels("good");
         d.set_target_grade("great");
       },
       {"design.target_grade", "'great' is not on the scale"}},
      {"start for an unknown parameter",
       [](v1::CampaignDesign& d) { (*d.mutable_start()->mutable_values())["nope"].set_real(1); },
       {"design.start.values['nope']", "not a parameter"}},
      {"start outside the bounds",
       [](v1::CampaignDesign& d) { (*d.mutable_start()->mutable_values())["x"].set_real(7); },
       {"design.start.values['x'].real", "in [0, 5], got 7"}},
      {"start of the wrong kind",
       [](v1::CampaignDesign& d) { (*d.mutable_start()->mutable_values())["x"].set_flag(true); },
       {"design.start.values['x']", "takes a real value"}},
      {"noise not one of the modes",
       [](v1::CampaignDesign& d) { d.set_noise("loud"); },
       {"design.noise", "must be off, auto or replicates:K with K in 2..16", "'loud'"}},
      {"too many replicates",
       [](v1::CampaignDesign& d) { d.set_noise("replicates:17"); },
       {"design.noise", "replicates:K with K in 2..16"}},
      {"model not one of the modes",
       [](v1::CampaignDesign& d) { d.set_model("yes"); },
       {"design.model", "must be one of \"auto\" (or empty), \"on\", \"off\"", "\"yes\""}},
      {"model on with a flag",
       [](v1::CampaignDesign& d) {
         d.set_model("on");
         v1::Parameter* p = d.add_parameters();
         p->set_name("glaze");
         p->mutable_flag();
       },
       {"design.model", "every parameter real or integer", "'glaze' is a flag", "\"auto\" or \"off\""}},
  };
  for (const BadDesignCase& c : cases) {
    SCOPED_TRACE(c.what);
    v1::CampaignDesign design = ScoredDesign("bad", {Real("x", 0, 5)});
    c.mutate(design);
    std::vector<::testing::Matcher<std::string>> parts;
    for (const std::string& p : c.message_parts) parts.push_back(HasSubstr(p));
    EXPECT_THAT(client_->CreateCampaign(design).status(),
                StatusIs(absl::StatusCode::kInvalidArgument, ::testing::AllOfArray(parts)));
  }
  absl::StatusOr<v1::ListCampaignsResponse> list = client_->ListCampaigns();
  ASSERT_TRUE(list.ok()) << list.status();
  EXPECT_EQ(list->campaigns_size(), 0);
  // The base design itself is fine.
  EXPECT_TRUE(client_->CreateCampaign(ScoredDesign("bad", {Real("x", 0, 5)})).ok());
}

TEST_F(ServiceTest, MalformedReportsFailTheWholeTellNamingTheReport) {
  Create(ScoredDesign("scored", {Real("x", 0, 1)}));
  Create(GradedDesign("graded"));
  AskOk("scored", 2);
  AskOk("graded", 1);
  TellOk("scored", {ScoreReport(1, 1.0)});
  const std::string scored_before = StoredState("scored");
  const std::string graded_before = StoredState("graded");
  const double nan = std::numeric_limits<double>::quiet_NaN();
  const double inf = std::numeric_limits<double>::infinity();
  const auto invalid = [](const std::string& field, const std::string& rule) {
    return StatusIs(absl::StatusCode::kInvalidArgument, AllOf(HasSubstr(field), HasSubstr(rule)));
  };

  EXPECT_THAT(client_->Tell("scored", {ScoreReport(2, nan)}, "w").status(),
              invalid("reports[0]", "finite"));
  EXPECT_THAT(client_->Tell("scored", {ScoreReport(2, inf)}, "w").status(),
              invalid("reports[0]", "finite"));
  EXPECT_THAT(client_->Tell("scored", {ScoreReport(2, -inf)}, "w").status(),
              invalid("reports[0]", "finite"));
  // A bad report after a good one: nothing of the call is stored.
  EXPECT_THAT(client_->Tell("scored", {ScoreReport(2, 3.0), ScoreReport(1, nan)}, "w").status(),
              invalid("reports[1]", "finite"));
  v1::Report no_outcome;
  no_outcome.set_trial(2);
  EXPECT_THAT(client_->Tell("scored", {no_outcome}, "w").status(),
              invalid("reports[0]", "score, grade, infeasible, void"));
  EXPECT_THAT(client_->Tell("scored", {ScoreReport(2, 3.0, std::string(5000, 'n'))}, "w").status(),
              invalid("reports[0].outcome.note", "4096"));
  EXPECT_THAT(client_->Tell("scored", {GradeReport(2, "good")}, "w").status(),
              invalid("reports[0]", "takes scores"));
  EXPECT_THAT(client_->Tell("scored", {}, "w").status(), invalid("reports", "1..1000"));
  std::vector<v1::Report> too_many;
  for (int i = 0; i < 1001; ++i) too_many.push_back(ScoreReport(2, 3.0));
  EXPECT_THAT(client_->Tell("scored", too_many, "w").status(),
              StatusIs(absl::StatusCode::kResourceExhausted, AllOf(HasSubstr("reports"), HasSubstr("at most 1000"))));

  EXPECT_THAT(client_->Tell("graded", {GradeReport(1, "excellent")}, "w").status(),
              invalid("reports[0]", "'excellent' is not on the scale; allowed: cracked, poor"));
  EXPECT_THAT(client_->Tell("graded", {ScoreReport(1, 2.0)}, "w").status(),
              invalid("reports[0]", "graded"));

  EXPECT_EQ(StoredState("scored"), scored_before);
  EXPECT_EQ(StoredState("graded"), graded_before);
  ExpectSameAfterRestart({"scored", "graded"});
}

TEST_F(ServiceTest, AskCountOutsideOneToTheLimitIsRefused) {
  Create(ScoredDesign("counted", {Real("x", 0, 1)}));
  AskOk("counted", 1);
  const std::string before = StoredState("counted");
  for (int count : {0, -1}) {
    SCOPED_TRACE(count);
    EXPECT_THAT(client_->Ask("counted", count, "w").status(),
                StatusIs(absl::StatusCode::kInvalidArgument,
                         AllOf(HasSubstr("count"), HasSubstr("1..1000"))));
  }
  EXPECT_THAT(client_->Ask("counted", 1001, "w").status(),
              StatusIs(absl::StatusCode::kResourceExhausted, HasSubstr("count: at most 1000 trials")));
  for (double lease : {-1.0, std::numeric_limits<double>::quiet_NaN(), 1e12}) {
    SCOPED_TRACE(lease);
    EXPECT_THAT(client_->Ask("counted", 1, "w", lease).status(),
                StatusIs(absl::StatusCode::kInvalidArgument, HasSubstr("lease_seconds")));
  }
  EXPECT_EQ(StoredState("counted"), before);
  EXPECT_EQ(AskOk("counted", 1000).trials_size(), 1000);  // the limit itself is allowed

  // With page_size 0 a page holds 100 trials.
  v1::ListTrialsRequest request;
  request.set_campaign("counted");
  absl::StatusOr<v1::ListTrialsResponse> page = client_->ListTrials(request);
  ASSERT_TRUE(page.ok()) << page.status();
  EXPECT_EQ(page->trials_size(), 100);
  EXPECT_FALSE(page->next_page_token().empty());
  EXPECT_EQ(AllTrials("counted").size(), 1001u);
}

TEST_F(ServiceTest, DifferentOutcomeForAReportedTrialIsAlreadyExists) {
  Create(ScoredDesign("once", {Real("x", 0, 1)}));
  AskOk("once", 2);
  TellOk("once", {ScoreReport(1, 1.5, "measured")});
  const std::string before = StoredState("once");

  v1::TellResponse told = TellOk("once", {ScoreReport(1, 2.5), VoidReport(1), InfeasibleReport(1)});
  for (const v1::ReportResult& r : told.results()) {
    EXPECT_EQ(r.code(), static_cast<int>(absl::StatusCode::kAlreadyExists));
    EXPECT_THAT(r.message(), AllOf(HasSubstr("trial 1"), HasSubstr("already reported")));
    EXPECT_FALSE(r.duplicate());
  }
  EXPECT_EQ(StoredState("once"), before);

  // The same outcome again is accepted once: a duplicate, nothing changes.
  told = TellOk("once", {ScoreReport(1, 1.5, "measured")});
  EXPECT_EQ(told.results(0).code(), 0);
  EXPECT_TRUE(told.results(0).duplicate());
  EXPECT_EQ(StoredState("once"), before);
  const std::vector<v1::Trial> trials = AllTrials("once");
  EXPECT_EQ(trials[0].outcome().score(), 1.5);
  EXPECT_EQ(trials[0].outcome().note(), "measured");

  // Within one call: the first report of trial 2 is stored, a second different one refused, a
  // repeat of the first a duplicate.
  told = TellOk("once", {VoidReport(2, "no run"), ScoreReport(2, 4.0), VoidReport(2, "no run")});
  EXPECT_EQ(told.results(0).code(), 0);
  EXPECT_FALSE(told.results(0).duplicate());
  EXPECT_EQ(told.results(1).code(), static_cast<int>(absl::StatusCode::kAlreadyExists));
  EXPECT_EQ(told.results(2).code(), 0);
  EXPECT_TRUE(told.results(2).duplicate());
  EXPECT_EQ(AllTrials("once")[1].state(), v1::TRIAL_STATE_VOIDED);
  EXPECT_EQ(Get("once").status().voided(), 1);
  ExpectSameAfterRestart({"once"});
}

TEST_F(ServiceTest, AskOnAPausedOrDoneCampaignIsFailedPrecondition) {
  Create(ScoredDesign("phases", {Real("x", 0, 1)}));
  AskOk("phases", 1);
  absl::StatusOr<v1::CampaignView> paused = client_->SetPhase("phases", v1::PHASE_COMMAND_PAUSE);
  ASSERT_TRUE(paused.ok()) << paused.status();
  EXPECT_EQ(paused->status().phase(), v1::CAMPAIGN_PHASE_PAUSED);
  std::string before = StoredState("phases");
  EXPECT_THAT(client_->Ask("phases", 1, "w").status(),
              StatusIs(absl::StatusCode::kFailedPrecondition, HasSubstr("paused")));
  EXPECT_EQ(StoredState("phases"), before);
  // Reports are still taken while paused.
  EXPECT_EQ(TellOk("phases", {ScoreReport(1, 0.5)}).results(0).code(), 0);

  ASSERT_TRUE(client_->SetPhase("phases", v1::PHASE_COMMAND_RESUME).ok());
  EXPECT_EQ(AskOk("phases", 1).trials_size(), 1);

  absl::StatusOr<v1::CampaignView> done = client_->SetPhase("phases", v1::PHASE_COMMAND_FINISH);
  ASSERT_TRUE(done.ok()) << done.status();
  EXPECT_EQ(done->status().phase(), v1::CAMPAIGN_PHASE_DONE);
  EXPECT_EQ(done->status().reason(), v1::DONE_REASON_STOPPED);
  before = StoredState("phases");
  EXPECT_THAT(client_->Ask("phases", 1, "w").status(),
              StatusIs(absl::StatusCode::kFailedPrecondition, HasSubstr("done")));
  EXPECT_THAT(client_->SetPhase("phases", v1::PHASE_COMMAND_RESUME).status(),
              StatusIs(absl::StatusCode::kFailedPrecondition, HasSubstr("cannot be resumed")));
  EXPECT_EQ(StoredState("phases"), before);
  ExpectSameAfterRestart({"phases"});
}

TEST_F(ServiceTest, RequestLargerThanTheReceiveLimitIsResourceExhausted) {
  Create(ScoredDesign("big", {Real("x", 0, 1)}));
  AskOk("big", 1);
  const std::string before = StoredState("big");

  // Over the limit: refused by ogived, naming the flag and the limit.
  EXPECT_THAT(
      client_->Tell("big", {ScoreReport(1, 1.0, std::string(kMaxReceiveBytes + 100, 'x'))}, "w").status(),
      StatusIs(absl::StatusCode::kResourceExhausted,
               AllOf(HasSubstr("--max-message-bytes"), HasSubstr(absl::StrCat(kMaxReceiveBytes)))));
  // As many reports as make the request a little over the limit.
  std::vector<v1::Report> thousands;
  v1::TellRequest sized;
  while (sized.ByteSizeLong() <= kMaxReceiveBytes + 1000) {
    thousands.push_back(ScoreReport(1, 1.0));
    *sized.add_reports() = thousands.back();
  }
  EXPECT_THAT(client_->Tell("big", thousands, "w").status(),
              StatusIs(absl::StatusCode::kResourceExhausted, HasSubstr("--max-message-bytes")));
  // Past twice the limit: cut off by gRPC itself, before ogived reads it.
  EXPECT_THAT(
      client_->Tell("big", {ScoreReport(1, 1.0, std::string(2 * kMaxReceiveBytes + 100, 'x'))}, "w").status(),
      StatusIs(absl::StatusCode::kResourceExhausted, HasSubstr("larger than max")));

  EXPECT_EQ(StoredState("big"), before);
  EXPECT_EQ(TellOk("big", {ScoreReport(1, 1.0)}).results(0).code(), 0);  // still serving
  ExpectSameAfterRestart({"big"});
}

TEST_F(ServiceTest, TakenCampaignNameIsAlreadyExists) {
  Create(ScoredDesign("taken", {Real("x", 0, 1)}));
  AskOk("taken", 1);
  const std::string before = StoredState("taken");
  v1::CampaignDesign other = ScoredDesign("taken", {Real("y", 0, 2)});
  EXPECT_THAT(client_->CreateCampaign(other).status(),
              StatusIs(absl::StatusCode::kAlreadyExists, HasSubstr("'taken'")));
  EXPECT_EQ(StoredState("taken"), before);
}

TEST_F(ServiceTest, CreateCampaignRetriedWithItsRequestIdReturnsTheSameCampaign) {
  v1::CreateCampaignRequest request;
  *request.mutable_design() = ScoredDesign("retried", {Real("x", 0, 1)});
  request.set_request_id("create-retried-1");
  v1::CampaignView first, second, third;
  {
    grpc::ClientContext context;
    SetDeadline(context);
    const grpc::Status s = client_->stub().CreateCampaign(&context, request, &first);
    ASSERT_TRUE(s.ok()) << s.error_message();
  }
  {
    grpc::ClientContext context;
    SetDeadline(context);
    const grpc::Status s = client_->stub().CreateCampaign(&context, request, &second);
    ASSERT_TRUE(s.ok()) << s.error_message();
  }
  EXPECT_EQ(DeterministicBytes(WithoutActivity(second)), DeterministicBytes(WithoutActivity(first)));
  absl::StatusOr<v1::ListCampaignsResponse> list = client_->ListCampaigns();
  ASSERT_TRUE(list.ok()) << list.status();
  EXPECT_EQ(list->campaigns_size(), 1);

  // Another request id for the same name is another request: refused.
  request.set_request_id("create-retried-2");
  grpc::ClientContext context;
  SetDeadline(context);
  const grpc::Status s = client_->stub().CreateCampaign(&context, request, &third);
  EXPECT_EQ(s.error_code(), grpc::StatusCode::ALREADY_EXISTS);
  EXPECT_THAT(s.error_message(), HasSubstr("'retried'"));
}

TEST_F(ServiceTest, AskRetriedWithItsRequestIdReturnsTheSameTrials) {
  Create(ScoredDesign("asked", {Real("x", 0, 1), Integer("n", 0, 9)}));
  absl::StatusOr<v1::AskResponse> first = AskWithRequestId(*client_, "asked", 3, "ask-1");
  absl::StatusOr<v1::AskResponse> again = AskWithRequestId(*client_, "asked", 3, "ask-1");
  ASSERT_TRUE(first.ok()) << first.status();
  ASSERT_TRUE(again.ok()) << again.status();
  EXPECT_THAT(Numbers(*first), ElementsAre(1, 2, 3));
  EXPECT_EQ(Numbers(*again), Numbers(*first));
  for (int i = 0; i < 3; ++i) {
    EXPECT_EQ(DeterministicBytes(again->trials(i).candidate()),
              DeterministicBytes(first->trials(i).candidate()));
  }
  EXPECT_EQ(AllTrials("asked").size(), 3u);
  absl::StatusOr<v1::AskResponse> other = AskWithRequestId(*client_, "asked", 2, "ask-2");
  ASSERT_TRUE(other.ok()) << other.status();
  EXPECT_THAT(Numbers(*other), ElementsAre(4, 5));
  EXPECT_EQ(AllTrials("asked").size(), 5u);
  ExpectSameAfterRestart({"asked"});
}

TEST_F(ServiceTest, RenewExtendsTheLeaseOfItsHolderOnly) {
  Create(ScoredDesign("renewed", {Real("x", 0, 1)}));
  const v1::AskResponse asked = AskOk("renewed", 2, 5.0);
  const int64_t renewed_at_ms = absl::ToUnixMillis(absl::Now());
  absl::StatusOr<v1::RenewResponse> renewed = client_->Renew("renewed", {1, 2}, "worker-1", 120);
  ASSERT_TRUE(renewed.ok()) << renewed.status();
  ASSERT_EQ(renewed->trials_size(), 2);
  EXPECT_NEAR(static_cast<double>(renewed->trials(0).lease_deadline_unix_ms() - renewed_at_ms),
              120000.0, 5000.0);
  EXPECT_EQ(AllTrials("renewed")[1].lease_deadline_unix_ms(),
            renewed->trials(1).lease_deadline_unix_ms());
  TellOk("renewed", {ScoreReport(2, 1.0)});
  const std::string before = StoredState("renewed");
  EXPECT_THAT(client_->Renew("renewed", {1}, "intruder").status(),
              StatusIs(absl::StatusCode::kFailedPrecondition,
                       AllOf(HasSubstr("trial 1"), HasSubstr("worker-1"))));
  EXPECT_THAT(client_->Renew("renewed", {1, 9}, "worker-1").status(),
              StatusIs(absl::StatusCode::kNotFound, HasSubstr("trial 9")));
  EXPECT_THAT(client_->Renew("renewed", {1, 2}, "worker-1").status(),
              StatusIs(absl::StatusCode::kFailedPrecondition, HasSubstr("already reported")));
  EXPECT_THAT(client_->Renew("renewed", {}, "worker-1").status(),
              StatusIs(absl::StatusCode::kInvalidArgument, HasSubstr("trials")));
  EXPECT_EQ(StoredState("renewed"), before);  // all or nothing: trial 1 was not renewed either
  EXPECT_EQ(asked.trials_size(), 2);
  ExpectSameAfterRestart({"renewed"});
}

TEST_F(ServiceTest, TrialBudgetLimitsAsksAndEndsTheCampaign) {
  v1::CampaignDesign design = ScoredDesign("budget", {Real("x", 0, 1)});
  design.set_trial_budget(5);
  design.set_population_size(4);
  Create(design);
  EXPECT_EQ(AskOk("budget", 8).trials_size(), 5);  // room for five
  EXPECT_THAT(client_->Ask("budget", 1, "w").status(),
              StatusIs(absl::StatusCode::kFailedPrecondition, HasSubstr("budget of 5")));
  TellOk("budget", {VoidReport(5)});  // a void does not count: room for one more
  const v1::AskResponse refill = AskOk("budget", 3);
  ASSERT_EQ(refill.trials_size(), 1);
  EXPECT_EQ(refill.trials(0).number(), 6);
  const v1::TellResponse told =
      TellOk("budget", {ScoreReport(1, 1.0), ScoreReport(2, 2.0), ScoreReport(3, 3.0),
                        ScoreReport(4, 4.0), ScoreReport(6, 0.5)});
  EXPECT_EQ(told.phase(), v1::CAMPAIGN_PHASE_DONE);
  const v1::StatusSummary status = Get("budget").status();
  EXPECT_EQ(status.phase(), v1::CAMPAIGN_PHASE_DONE);
  EXPECT_EQ(status.reason(), v1::DONE_REASON_BUDGET);
  EXPECT_EQ(status.reported(), 5);
  EXPECT_EQ(status.best().number(), 6);
  EXPECT_THAT(client_->Ask("budget", 1, "w").status(),
              StatusIs(absl::StatusCode::kFailedPrecondition, HasSubstr("done (budget)")));
  ExpectSameAfterRestart({"budget"});
}

TEST_F(ServiceTest, TargetScoreEndsTheCampaign) {
  v1::CampaignDesign design = ScoredDesign("target", {Real("x", 0, 1)});
  design.mutable_objective()->set_direction(v1::DIRECTION_HIGHER_IS_BETTER);
  design.set_target(0.9);
  Create(design);
  AskOk("target", 2);
  EXPECT_EQ(TellOk("target", {ScoreReport(1, 0.5)}).phase(), v1::CAMPAIGN_PHASE_OPEN);
  EXPECT_EQ(TellOk("target", {ScoreReport(2, 0.95)}).phase(), v1::CAMPAIGN_PHASE_DONE);
  const v1::StatusSummary status = Get("target").status();
  EXPECT_EQ(status.reason(), v1::DONE_REASON_TARGET);
  EXPECT_EQ(status.best().number(), 2);
  ExpectSameAfterRestart({"target"});
}

TEST_F(ServiceTest, OutcomesOlderThanTheStalenessLimitAreKeptButNotUsed) {
  v1::CampaignDesign design = ScoredDesign("stale", {Real("x", 0, 1), Real("y", 0, 1)});
  design.set_population_size(2);
  design.set_staleness_limit(1);
  Create(design);
  ASSERT_EQ(AskOk("stale", 1).trials(0).generation(), 0);  // trial 1, held back
  // One trial at a time besides the held one, so that no more than λ = 2 are ever out (λ follows
  // the observed concurrency): three generations from six trials.
  for (int k = 0; k < 6; ++k) {
    const v1::AskResponse asked = AskOk("stale", 1);
    ASSERT_EQ(asked.trials_size(), 1);
    TellOk("stale", {ScoreReport(asked.trials(0).number(), 1.0 + k)});
  }
  ASSERT_EQ(Get("stale").status().population_size(), 2);
  ASSERT_EQ(Get("stale").status().generation(), 3);
  const v1::TellResponse told = TellOk("stale", {ScoreReport(1, 0.1, "three generations late")});
  EXPECT_EQ(told.results(0).code(), 0);
  EXPECT_EQ(told.generation(), 3);
  const v1::Trial first = AllTrials("stale")[0];
  EXPECT_EQ(first.state(), v1::TRIAL_STATE_REPORTED);
  EXPECT_EQ(first.use(), v1::OUTCOME_USE_TOO_STALE);
  EXPECT_EQ(first.consumed_by(), -1);
  const v1::StatusSummary status = Get("stale").status();
  EXPECT_EQ(status.too_stale(), 1);
  EXPECT_EQ(status.pending(), 0);
  EXPECT_EQ(status.consumed(), 6);
  ExpectSameAfterRestart({"stale"});
}

TEST_F(ServiceTest, ConcurrentWorkersLoseNoReport) {
  v1::CampaignDesign busy = SphereDesign("busy");
  busy.set_expected_workers(6);
  Create(busy);
  Create(SphereDesign("quiet"));
  constexpr int kWorkers = 8;
  constexpr int kRounds = 15;
  std::atomic<int> failures{0};
  std::vector<std::thread> workers;
  for (int w = 0; w < kWorkers; ++w) {
    workers.emplace_back([&, w] {
      const std::string campaign = w < 6 ? "busy" : "quiet";
      const std::string name = absl::StrCat("worker-", w);
      for (int round = 0; round < kRounds; ++round) {
        absl::StatusOr<v1::AskResponse> asked = client_->Ask(campaign, 1, name);
        if (!asked.ok() || asked->trials_size() != 1) {
          ++failures;
          return;
        }
        const v1::Trial& t = asked->trials(0);
        absl::StatusOr<v1::TellResponse> told =
            client_->Tell(campaign, {ScoreReport(t.number(), Sphere(t.candidate()))}, name);
        if (!told.ok() || told->results(0).code() != 0) ++failures;
      }
    });
  }
  for (std::thread& t : workers) t.join();
  EXPECT_EQ(failures.load(), 0);
  for (const auto& [campaign, count] : {std::pair<std::string, int>{"busy", 6 * kRounds},
                                     std::pair<std::string, int>{"quiet", 2 * kRounds}}) {
    SCOPED_TRACE(campaign);
    const std::vector<v1::Trial> trials = AllTrials(campaign);
    ASSERT_EQ(trials.size(), static_cast<size_t>(count));
    for (int i = 0; i < count; ++i) {
      EXPECT_EQ(trials[i].number(), i + 1);
      EXPECT_EQ(trials[i].state(), v1::TRIAL_STATE_REPORTED);
    }
    const v1::StatusSummary status = Get(campaign).status();
    EXPECT_EQ(status.reported(), count);
    EXPECT_EQ(status.consumed() + status.pending() + status.too_stale(), count);
    EXPECT_LT(status.pending(), status.population_size());
    EXPECT_EQ(status.consumed(), status.generation() * status.population_size());
  }
  EXPECT_EQ(Get("busy").status().population_size(), 7);  // max(4 + floor(3 ln 3), 6 workers)
  ExpectSameAfterRestart({"busy", "quiet"});
}

TEST_F(ServiceTest, ListCampaignsShowsEveryCampaignInNameOrderWithoutDesigns) {
  Create(ScoredDesign("zeta", {Real("x", 0, 1)}));
  Create(ScoredDesign("alpha", {Real("x", 0, 1)}));
  Create(GradedDesign("mid"));
  AskOk("mid", 2);
  absl::StatusOr<v1::ListCampaignsResponse> list = client_->ListCampaigns();
  ASSERT_TRUE(list.ok()) << list.status();
  std::vector<std::string> names;
  for (const v1::CampaignView& v : list->campaigns()) {
    names.push_back(v.name());
    EXPECT_FALSE(v.has_design());
  }
  EXPECT_THAT(names, ElementsAre("alpha", "mid", "zeta"));
  EXPECT_EQ(list->campaigns(1).status().leased(), 2);
}

TEST(ServiceLimitsTest, CampaignsBeyondTheServersLimitAreResourceExhausted) {
  const std::string path = TempDbPath("max_campaigns");
  RemoveDb(path);
  {
    service::ServiceLimits limits;
    limits.max_campaigns = 2;
    limits.max_ask_count = 5;
    LoopbackServer server(path, limits);
    ASSERT_TRUE(server.Start().ok());
    std::unique_ptr<client::Client> c = server.NewClient();
    ASSERT_TRUE(c->CreateCampaign(ScoredDesign("one", {Real("x", 0, 1)})).ok());
    ASSERT_TRUE(c->CreateCampaign(ScoredDesign("two", {Real("x", 0, 1)})).ok());
    EXPECT_THAT(c->CreateCampaign(ScoredDesign("three", {Real("x", 0, 1)})).status(),
                StatusIs(absl::StatusCode::kResourceExhausted, HasSubstr("2 campaigns")));
    EXPECT_THAT(c->Ask("one", 6, "w").status(),
                StatusIs(absl::StatusCode::kResourceExhausted, HasSubstr("count: at most 5 trials")));
    absl::StatusOr<v1::AskResponse> asked = c->Ask("one", 5, "w");
    ASSERT_TRUE(asked.ok()) << asked.status();
    EXPECT_EQ(asked->trials_size(), 5);
    absl::StatusOr<v1::ListCampaignsResponse> list = c->ListCampaigns();
    ASSERT_TRUE(list.ok()) << list.status();
    EXPECT_EQ(list->campaigns_size(), 2);
  }
  RemoveDb(path);
}

// ---- Health ----

TEST_F(ServiceTest, ViewsShowTheLastHoursReportsAndWorkers) {
  Create(MixedDesign("activity"));
  const v1::AskResponse asked = AskOk("activity", 5);
  ASSERT_EQ(asked.trials_size(), 5);
  // worker-1 asked; worker-2 reports three trials (one twice: a duplicate is not a new report).
  std::vector<v1::Report> reports;
  for (int i = 0; i < 3; ++i) reports.push_back(ScoreReport(asked.trials(i).number(), 1.0 + i));
  ASSERT_TRUE(client_->Tell("activity", reports, "worker-2").ok());
  ASSERT_TRUE(client_->Tell("activity", {reports[0]}, "worker-2").ok());
  const absl::Time before_view = absl::Now();
  v1::StatusSummary s = Get("activity").status();
  EXPECT_EQ(s.reports_last_hour(), 3);
  EXPECT_GE(s.as_of_unix_ms(), absl::ToUnixMillis(before_view));
  ASSERT_EQ(s.workers_size(), 2);
  EXPECT_EQ(s.workers(0).worker(), "worker-2");  // latest first
  EXPECT_EQ(s.workers(0).reports_last_hour(), 3);
  EXPECT_EQ(s.workers(1).worker(), "worker-1");
  EXPECT_EQ(s.workers(1).reports_last_hour(), 0);
  EXPECT_LE(s.workers(1).last_seen_unix_ms(), s.workers(0).last_seen_unix_ms());

  // After a restart the reports are counted again from the store (asks are not stored).
  client_.reset();
  server_->Stop();
  ASSERT_TRUE(server_->Start().ok());
  client_ = server_->NewClient();
  s = Get("activity").status();
  EXPECT_EQ(s.reports_last_hour(), 3);
  ASSERT_GE(s.workers_size(), 1);
}

TEST_F(ServiceTest, HealthServiceAnswersServing) {
  const std::shared_ptr<grpc::Channel> channel = Channel();
  constexpr int kServing = 1;
  constexpr int kNotServing = 2;
  absl::StatusOr<int> overall = HealthCheck(channel, "");
  ASSERT_TRUE(overall.ok()) << overall.status();
  EXPECT_EQ(*overall, kServing);
  EXPECT_THAT(HealthCheck(channel, "no.such.Service").status(),
              StatusIs(absl::StatusCode::kNotFound, ::testing::_));
  // What ogived does when it starts draining.
  server_->server().GetHealthCheckService()->SetServingStatus(false);
  overall = HealthCheck(channel, "");
  ASSERT_TRUE(overall.ok()) << overall.status();
  EXPECT_EQ(*overall, kNotServing);
}

}  // namespace
}  // namespace ogive
