// Every request field of proto/ogive/v1/service.proto and campaign.proto that a client sets, refused when
// malformed: each bad request goes through the handlers (server/service/handlers.h, the functions the
// gRPC service calls) of a Registry over a SqliteStore on a temporary file, and must fail with the
// right code (INVALID_ARGUMENT, or RESOURCE_EXHAUSTED beyond a count limit), a message naming the
// field's path and what is allowed, and leave what is stored byte for byte unchanged (every campaign as
// LoadAll() reads it back from the file, and its event log). The server runs with small limits so
// that requests beyond them are cheap to build; the cases next to each limit show that the limit
// itself is accepted. Also checks the limit flags of ogived (LimitFlags, SetLimitFromFlag).
//
// Cases already covered over the wire by service_test (MalformedDesignsAreRefusedNamingTheField,
// MalformedReportsFailTheWholeTellNamingTheReport, AskCountOutsideOneToTheLimitIsRefused) are not
// repeated here.
#include <unistd.h>

#include <cmath>
#include <cstdio>
#include <functional>
#include <limits>
#include <memory>
#include <string>
#include <vector>

#include "absl/status/status.h"
#include "absl/strings/str_cat.h"
#include "absl/time/clock.h"
#include "gmock/gmock.h"
#include "google/protobuf/io/coded_stream.h"
#include "google/protobuf/io/zero_copy_stream_impl_lite.h"
#include "grpcpp/grpcpp.h"
#include "gtest/gtest.h"
#include "ogive/v1/service.pb.h"
#include "server/campaign/campaign_options.h"
#include "server/service/authorizer.h"
#include "server/service/grpc_service.h"
#include "server/service/validation.h"
#include "server/service/handlers.h"
#include "server/service/limits.h"
#include "server/service/registry.h"
#include "storage/sqlite_store.h"

namespace ogive {
namespace {

using ::testing::AllOfArray;
using ::testing::HasSubstr;

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
constexpr double kInf = std::numeric_limits<double>::infinity();

// Small limits, so that a request just beyond each is cheap.
service::ServiceLimits TestLimits() {
  service::ServiceLimits limits;
  limits.max_parameters = 6;
  limits.max_options = 4;
  limits.max_ask_count = 5;
  limits.max_reports_per_tell = 3;
  limits.max_name_bytes = 24;
  limits.max_request_id_bytes = 40;
  limits.max_note_bytes = 64;
  limits.max_description_bytes = 80;
  limits.max_page_size = 200;
  limits.max_lease_seconds = 3600;
  return limits;
}

std::string DeterministicBytes(const google::protobuf::Message& message) {
  std::string bytes;
  google::protobuf::io::StringOutputStream stream(&bytes);
  google::protobuf::io::CodedOutputStream coded(&stream);
  coded.SetSerializationDeterministic(true);
  message.SerializeToCodedStream(&coded);
  coded.Trim();
  return bytes;
}

v1::Parameter Real(const std::string& name, double low, double high) {
  v1::Parameter p;
  p.set_name(name);
  p.mutable_real()->set_low(low);
  p.mutable_real()->set_high(high);
  return p;
}

// The design every bad design below starts from: valid as it is (the test creates it first).
v1::CampaignDesign BaseDesign(const std::string& name) {
  v1::CampaignDesign d;
  d.set_name(name);
  *d.add_parameters() = Real("x", 0, 5);
  v1::Parameter* n = d.add_parameters();
  n->set_name("n");
  n->mutable_integer()->set_low(1);
  n->mutable_integer()->set_high(9);
  v1::Parameter* gas = d.add_parameters();
  gas->set_name("gas");
  gas->mutable_categorical()->add_options("ar");
  gas->mutable_categorical()->add_options("n2");
  v1::Parameter* f = d.add_parameters();
  f->set_name("f");
  f->mutable_flag();
  d.mutable_objective()->set_direction(v1::DIRECTION_LOWER_IS_BETTER);
  d.set_population_size(4);
  d.set_seed(3);
  return d;
}

v1::CampaignDesign GradedDesign(const std::string& name) {
  v1::CampaignDesign d;
  d.set_name(name);
  *d.add_parameters() = Real("x", 0, 1);
  for (const char* label : {"poor", "fair", "good"}) d.mutable_objective()->mutable_grade_scale()->add_labels(label);
  d.set_population_size(4);
  return d;
}

struct Case {
  std::string what;
  std::function<absl::Status(service::Registry&)> call;
  absl::StatusCode code;
  std::vector<std::string> message_parts;
};

template <typename T>
absl::Status StatusOf(const absl::StatusOr<T>& result) {
  return result.status();
}

class ValidationTest : public ::testing::Test {
 protected:
  void SetUp() override {
    path_ = absl::StrCat(::testing::TempDir(), "ogive_validation_test_", getpid(), ".db");
    Remove();
    absl::StatusOr<std::unique_ptr<storage::SqliteStore>> store = storage::SqliteStore::Open(path_);
    ASSERT_TRUE(store.ok()) << store.status();
    store_ = *std::move(store);
    registry_ = std::make_unique<service::Registry>(store_.get(), TestLimits());
    ASSERT_TRUE(registry_->LoadAll().ok());

    // Two campaigns with some history: trials leased, one scored, one graded.
    for (const v1::CampaignDesign& d : {BaseDesign("base"), GradedDesign("graded")}) {
      v1::CreateCampaignRequest create;
      *create.mutable_design() = d;
      ASSERT_TRUE(service::CreateCampaign(*registry_, create).ok()) << d.name();
      v1::AskRequest ask;
      ask.set_campaign(d.name());
      ask.set_count(3);
      ask.set_worker("w1");
      ASSERT_TRUE(service::Ask(*registry_, ask, absl::Now()).ok());
    }
    v1::TellRequest tell;
    tell.set_campaign("base");
    tell.set_worker("w1");
    v1::Report* r = tell.add_reports();
    r->set_trial(1);
    r->mutable_outcome()->set_score(1.5);
    ASSERT_TRUE(service::Tell(*registry_, tell, absl::Now()).ok());
  }

  void TearDown() override {
    registry_.reset();
    store_.reset();
    Remove();
  }

  void Remove() {
    for (const char* suffix : {"", "-wal", "-shm", "-journal", ".lock"}) std::remove(absl::StrCat(path_, suffix).c_str());
  }

  // Everything stored: each campaign as the file holds it, and its event log.
  std::string Stored() {
    absl::StatusOr<std::vector<storage::StoredCampaign>> all = store_->LoadAll();
    EXPECT_TRUE(all.ok()) << all.status();
    std::string out;
    if (!all.ok()) return out;
    for (const storage::StoredCampaign& s : *all) {
      absl::StrAppend(&out, s.id, "/", s.name, "/", DeterministicBytes(s.design), "/", DeterministicBytes(s.snapshot),
                      "/", s.create_request_id, "/", s.ask_requests.size(), "\n");
      absl::StatusOr<std::vector<storage::Event>> events = store_->ListEvents(s.id, 1000);
      EXPECT_TRUE(events.ok()) << events.status();
      if (events.ok()) {
        for (const storage::Event& e : *events) absl::StrAppend(&out, e.kind, ":", e.trial, ":", e.message, "\n");
      }
    }
    return out;
  }

  void ExpectRefused(const std::vector<Case>& cases) {
    const std::string before = Stored();
    ASSERT_FALSE(before.empty());
    for (const Case& c : cases) {
      SCOPED_TRACE(c.what);
      const absl::Status status = c.call(*registry_);
      EXPECT_EQ(status.code(), c.code) << status;
      std::vector<::testing::Matcher<std::string>> parts;
      for (const std::string& p : c.message_parts) parts.push_back(HasSubstr(p));
      EXPECT_THAT(std::string(status.message()), AllOfArray(parts));
    }
    EXPECT_EQ(Stored(), before);
  }

  static std::function<absl::Status(service::Registry&)> Create(std::function<void(v1::CampaignDesign&)> mutate,
                                                                std::string request_id = "") {
    return [mutate = std::move(mutate), request_id](service::Registry& r) {
      v1::CreateCampaignRequest request;
      *request.mutable_design() = BaseDesign("fresh");
      mutate(*request.mutable_design());
      request.set_request_id(request_id);
      return StatusOf(service::CreateCampaign(r, request));
    };
  }

  std::string path_;
  std::unique_ptr<storage::SqliteStore> store_;
  std::unique_ptr<service::Registry> registry_;
};

constexpr absl::StatusCode kInvalid = absl::StatusCode::kInvalidArgument;
constexpr absl::StatusCode kExhausted = absl::StatusCode::kResourceExhausted;

TEST_F(ValidationTest, TheBaseRequestsAreAcceptedAtTheLimits) {
  // The limits themselves are allowed: a design with max_parameters parameters and max_options
  // options, names of max_name_bytes, a request id of max_request_id_bytes.
  v1::CreateCampaignRequest create;
  *create.mutable_design() = BaseDesign(std::string(24, 's'));
  create.set_request_id(std::string(40, 'r'));
  create.mutable_design()->mutable_parameters(2)->mutable_categorical()->add_options(std::string(24, 'o'));
  create.mutable_design()->mutable_parameters(2)->mutable_categorical()->add_options("he");
  *create.mutable_design()->add_parameters() = Real(std::string(24, 'p'), 0, 1);
  *create.mutable_design()->add_parameters() = Real("y", -1e300, 1e300);
  create.mutable_design()->mutable_parameters(0)->set_unit(std::string(24, 'u'));
  create.mutable_design()->mutable_parameters(0)->set_description(std::string(79, 'd') + "\n");
  create.mutable_design()->set_lease_seconds(3600);
  // The engine's largest population (one source: campaign::kMaxPopulationSize), in both fields.
  create.mutable_design()->set_population_size(campaign::kMaxPopulationSize);
  create.mutable_design()->set_expected_workers(campaign::kMaxPopulationSize);
  absl::StatusOr<v1::CampaignView> created = service::CreateCampaign(*registry_, create);
  ASSERT_TRUE(created.ok()) << created.status();
  EXPECT_EQ(created->status().population_size(), campaign::kMaxPopulationSize);

  v1::AskRequest ask;
  ask.set_campaign(create.design().name());
  ask.set_count(5);
  ask.set_worker(std::string(24, 'w'));
  ask.set_lease_seconds(3600);
  ask.set_request_id(std::string(40, 'q'));
  absl::StatusOr<v1::AskResponse> asked = service::Ask(*registry_, ask, absl::Now());
  ASSERT_TRUE(asked.ok()) << asked.status();
  ASSERT_EQ(asked->trials_size(), 5);

  v1::TellRequest tell;
  tell.set_campaign(ask.campaign());
  tell.set_worker(ask.worker());
  for (int i = 0; i < 3; ++i) {
    v1::Report* r = tell.add_reports();
    r->set_trial(asked->trials(i).number());
    r->mutable_outcome()->set_score(i);
    r->mutable_outcome()->set_note(std::string(64, 'n'));
  }
  absl::StatusOr<v1::TellResponse> told = service::Tell(*registry_, tell, absl::Now());
  ASSERT_TRUE(told.ok()) << told.status();
  for (const v1::ReportResult& r : told->results()) EXPECT_EQ(r.code(), 0) << r.message();

  v1::ListTrialsRequest list;
  list.set_campaign(ask.campaign());
  list.set_page_size(200);
  list.set_state(v1::TRIAL_STATE_REPORTED);
  absl::StatusOr<v1::ListTrialsResponse> page = service::ListTrials(*registry_, list);
  ASSERT_TRUE(page.ok()) << page.status();
  EXPECT_EQ(page->trials_size(), 3);

  v1::ListGenerationsRequest generations;
  generations.set_campaign(ask.campaign());
  generations.set_page_size(200);
  absl::StatusOr<v1::ListGenerationsResponse> history = service::ListGenerations(*registry_, generations);
  ASSERT_TRUE(history.ok()) << history.status();
  EXPECT_EQ(history->generations_size(), 0);  // 3 outcomes, λ = 4: no update yet
}

TEST_F(ValidationTest, DesignFieldsAreRefusedNamingTheirPath) {
  ExpectRefused({
      {"real low NaN", Create([](v1::CampaignDesign& d) { d.mutable_parameters(0)->mutable_real()->set_low(kNaN); }),
       kInvalid, {"design.parameters[0].real.low", "finite", "'x'"}},
      {"real high infinite",
       Create([](v1::CampaignDesign& d) { d.mutable_parameters(0)->mutable_real()->set_high(kInf); }), kInvalid,
       {"design.parameters[0].real.high", "finite"}},
      {"real range wider than a double",
       Create([](v1::CampaignDesign& d) { *d.add_parameters() = Real("wide", -1.5e308, 1.5e308); }), kInvalid,
       {"design.parameters[4].real", "high - low must be a finite number"}},
      {"integer range of more than 2^31 values",
       Create([](v1::CampaignDesign& d) {
         d.mutable_parameters(1)->mutable_integer()->set_low(std::numeric_limits<int64_t>::min());
         d.mutable_parameters(1)->mutable_integer()->set_high(std::numeric_limits<int64_t>::max());
       }),
       kInvalid, {"design.parameters[1].integer", "at most 2147483648 values"}},
      {"empty parameter name", Create([](v1::CampaignDesign& d) { d.mutable_parameters(3)->set_name(""); }), kInvalid,
       {"design.parameters[3].name", "must not be empty", "letters, digits"}},
      {"parameter name too long",
       Create([](v1::CampaignDesign& d) { d.mutable_parameters(3)->set_name(std::string(25, 'p')); }), kInvalid,
       {"design.parameters[3].name", "at most 24 bytes, got 25"}},
      {"parameter names equal but for case",
       Create([](v1::CampaignDesign& d) { *d.add_parameters() = Real("X", 0, 1); }), kInvalid,
       {"design.parameters[4].name", "'X' and parameters[0].name 'x'", "OGIVE_X"}},
      {"parameter names equal but for '-' and '_'",
       Create([](v1::CampaignDesign& d) {
         *d.add_parameters() = Real("flow-rate", 0, 1);
         *d.add_parameters() = Real("flow_rate", 0, 1);
       }),
       kInvalid, {"design.parameters[5].name", "OGIVE_FLOW_RATE"}},
      {"parameter name that shadows OGIVE_TRIAL",
       Create([](v1::CampaignDesign& d) { d.mutable_parameters(3)->set_name("Trial"); }), kInvalid,
       {"design.parameters[3].name", "shadow OGIVE_TRIAL"}},
      {"unit too long", Create([](v1::CampaignDesign& d) { d.mutable_parameters(0)->set_unit(std::string(25, 'u')); }),
       kInvalid, {"design.parameters[0].unit", "at most 24 bytes"}},
      {"unit with a newline", Create([](v1::CampaignDesign& d) { d.mutable_parameters(0)->set_unit("deg\nC"); }),
       kInvalid, {"design.parameters[0].unit", "control character"}},
      {"description too long",
       Create([](v1::CampaignDesign& d) { d.mutable_parameters(0)->set_description(std::string(81, 'd')); }), kInvalid,
       {"design.parameters[0].description", "at most 80 bytes, got 81"}},
      {"description with an escape sequence",
       Create([](v1::CampaignDesign& d) { d.mutable_parameters(0)->set_description("red \x1b[31m"); }), kInvalid,
       {"design.parameters[0].description", "control character", "tab and newline"}},
      {"more parameters than the limit",
       Create([](v1::CampaignDesign& d) {
         for (const char* name : {"a", "b", "c"}) *d.add_parameters() = Real(name, 0, 1);
       }),
       kExhausted, {"design.parameters", "at most 6 parameters", "got 7"}},
      {"categorical with one option",
       Create([](v1::CampaignDesign& d) { d.mutable_parameters(2)->mutable_categorical()->mutable_options()->RemoveLast(); }),
       kInvalid, {"design.parameters[2].categorical.options", "2..4", "got 1"}},
      {"more options than the limit",
       Create([](v1::CampaignDesign& d) {
         for (const char* o : {"he", "co2", "o2"}) d.mutable_parameters(2)->mutable_categorical()->add_options(o);
       }),
       kExhausted, {"design.parameters[2].categorical.options", "at most 4", "got 5"}},
      {"empty option",
       Create([](v1::CampaignDesign& d) { d.mutable_parameters(2)->mutable_categorical()->set_options(1, ""); }),
       kInvalid, {"design.parameters[2].categorical.options[1]", "must not be empty"}},
      {"option too long",
       Create([](v1::CampaignDesign& d) {
         d.mutable_parameters(2)->mutable_categorical()->set_options(1, std::string(25, 'o'));
       }),
       kInvalid, {"design.parameters[2].categorical.options[1]", "at most 24 bytes"}},
      {"option with a tab",
       Create([](v1::CampaignDesign& d) { d.mutable_parameters(2)->mutable_categorical()->set_options(0, "a\tr"); }),
       kInvalid, {"design.parameters[2].categorical.options[0]", "control character"}},
      {"option with a trailing blank",
       Create([](v1::CampaignDesign& d) { d.mutable_parameters(2)->mutable_categorical()->set_options(0, "ar "); }),
       kInvalid, {"design.parameters[2].categorical.options[0]", "'ar '", "blank"}},
      {"direction left unspecified",
       Create([](v1::CampaignDesign& d) { d.mutable_objective()->set_direction(v1::DIRECTION_UNSPECIFIED); }), kInvalid,
       {"design.objective.direction", "DIRECTION_LOWER_IS_BETTER or DIRECTION_HIGHER_IS_BETTER", "got 0"}},
      {"more grade labels than the limit",
       Create([](v1::CampaignDesign& d) {
         for (const char* l : {"a", "b", "c", "d", "e"}) d.mutable_objective()->mutable_grade_scale()->add_labels(l);
       }),
       kExhausted, {"design.objective.grade_scale.labels", "at most 4", "got 5"}},
      {"empty grade label",
       Create([](v1::CampaignDesign& d) {
         d.mutable_objective()->mutable_grade_scale()->add_labels("bad");
         d.mutable_objective()->mutable_grade_scale()->add_labels("");
       }),
       kInvalid, {"design.objective.grade_scale.labels[1]", "must not be empty"}},
      {"grade label too long",
       Create([](v1::CampaignDesign& d) {
         d.mutable_objective()->mutable_grade_scale()->add_labels(std::string(25, 'g'));
         d.mutable_objective()->mutable_grade_scale()->add_labels("ok");
       }),
       kInvalid, {"design.objective.grade_scale.labels[0]", "at most 24 bytes"}},
      {"population size beyond the engine's largest",
       Create([](v1::CampaignDesign& d) { d.set_population_size(4097); }), kInvalid,
       {"design.population_size", "2..4096", "got 4097"}},
      {"negative expected workers", Create([](v1::CampaignDesign& d) { d.set_expected_workers(-2); }), kInvalid,
       {"design.expected_workers", "got -2"}},
      {"expected workers beyond the engine's largest population",
       Create([](v1::CampaignDesign& d) { d.set_expected_workers(4097); }), kInvalid,
       {"design.expected_workers", "1..4096", "got 4097"}},
      {"lease NaN", Create([](v1::CampaignDesign& d) { d.set_lease_seconds(kNaN); }), kInvalid,
       {"design.lease_seconds", "(0, 3600]"}},
      {"lease infinite", Create([](v1::CampaignDesign& d) { d.set_lease_seconds(kInf); }), kInvalid,
       {"design.lease_seconds", "(0, 3600]"}},
      {"lease beyond the limit", Create([](v1::CampaignDesign& d) { d.set_lease_seconds(3601); }), kInvalid,
       {"design.lease_seconds", "(0, 3600]", "got 3601"}},
      {"initial spread NaN", Create([](v1::CampaignDesign& d) { d.set_initial_spread(kNaN); }), kInvalid,
       {"design.initial_spread", "(0, 1]"}},
      {"negative initial spread", Create([](v1::CampaignDesign& d) { d.set_initial_spread(-0.1); }), kInvalid,
       {"design.initial_spread", "(0, 1]"}},
      {"infinite target", Create([](v1::CampaignDesign& d) { d.set_target(-kInf); }), kInvalid,
       {"design.target", "finite"}},
      {"target grade on a scored campaign", Create([](v1::CampaignDesign& d) { d.set_target_grade("good"); }), kInvalid,
       {"design.target_grade", "scored campaign takes target"}},
      {"both targets",
       Create([](v1::CampaignDesign& d) {
         d.set_target(1);
         d.set_target_grade("good");
       }),
       kInvalid, {"design.target", "at most one of target and target_grade"}},
      {"start integer outside its range",
       Create([](v1::CampaignDesign& d) { (*d.mutable_start()->mutable_values())["n"].set_integer(10); }), kInvalid,
       {"design.start.values['n'].integer", "in [1, 9], got 10"}},
      {"start real NaN",
       Create([](v1::CampaignDesign& d) { (*d.mutable_start()->mutable_values())["x"].set_real(kNaN); }), kInvalid,
       {"design.start.values['x'].real", "in [0, 5]"}},
      {"start option not on the list",
       Create([](v1::CampaignDesign& d) { (*d.mutable_start()->mutable_values())["gas"].set_categorical("xe"); }),
       kInvalid, {"design.start.values['gas'].categorical", "'xe' is not an option; allowed: ar, n2"}},
      {"start value without a kind",
       Create([](v1::CampaignDesign& d) { (*d.mutable_start()->mutable_values())["f"]; }), kInvalid,
       {"design.start.values['f']", "takes a flag value"}},
      {"empty campaign name", Create([](v1::CampaignDesign& d) { d.set_name(""); }), kInvalid,
       {"design.name", "must not be empty"}},
      {"campaign name with a slash", Create([](v1::CampaignDesign& d) { d.set_name("../etc"); }), kInvalid,
       {"design.name", "letters, digits, '_', '-' and '.'"}},
      {"request id too long", Create([](v1::CampaignDesign&) {}, std::string(41, 'r')), kInvalid,
       {"request_id", "at most 40 bytes, got 41"}},
      {"request id with a blank", Create([](v1::CampaignDesign&) {}, "my id"), kInvalid,
       {"request_id", "printable ASCII without blanks"}},
      {"taken name of another campaign", Create([](v1::CampaignDesign& d) { d.set_name("base"); }),
       absl::StatusCode::kAlreadyExists, {"design.name", "'base' already exists"}},
  });
}

TEST_F(ValidationTest, AskRenewAndTellFieldsAreRefusedNamingTheirPath) {
  auto ask = [](std::function<void(v1::AskRequest&)> mutate) {
    return [mutate](service::Registry& r) {
      v1::AskRequest request;
      request.set_campaign("base");
      request.set_count(1);
      request.set_worker("w2");
      mutate(request);
      return StatusOf(service::Ask(r, request, absl::Now()));
    };
  };
  auto renew = [](std::function<void(v1::RenewRequest&)> mutate) {
    return [mutate](service::Registry& r) {
      v1::RenewRequest request;
      request.set_campaign("base");
      request.add_trials(2);
      request.set_worker("w1");
      mutate(request);
      return StatusOf(service::Renew(r, request, absl::Now()));
    };
  };
  // A tell of trial 2 of `campaign` (a score for "base", a grade for "graded"), then `mutate`.
  auto tell = [](const std::string& campaign, std::function<void(v1::TellRequest&)> mutate) {
    return [campaign, mutate](service::Registry& r) {
      v1::TellRequest request;
      request.set_campaign(campaign);
      request.set_worker("w1");
      v1::Report* report = request.add_reports();
      report->set_trial(2);
      if (campaign == "graded") {
        report->mutable_outcome()->set_grade("good");
      } else {
        report->mutable_outcome()->set_score(2.5);
      }
      mutate(request);
      return StatusOf(service::Tell(r, request, absl::Now()));
    };
  };
  ExpectRefused({
      {"ask: empty campaign", ask([](v1::AskRequest& a) { a.set_campaign(""); }), kInvalid, {"campaign", "must not be empty"}},
      {"ask: campaign name with a blank", ask([](v1::AskRequest& a) { a.set_campaign("my campaign"); }), kInvalid,
       {"campaign: 'my campaign'", "letters, digits"}},
      {"ask: campaign name too long", ask([](v1::AskRequest& a) { a.set_campaign(std::string(25, 's')); }), kInvalid,
       {"campaign", "at most 24 bytes"}},
      {"ask: count beyond the limit", ask([](v1::AskRequest& a) { a.set_count(6); }), kExhausted,
       {"count", "at most 5 trials", "got 6"}},
      {"ask: worker too long", ask([](v1::AskRequest& a) { a.set_worker(std::string(25, 'w')); }), kInvalid,
       {"worker", "at most 24 bytes"}},
      {"ask: worker with a newline (a forged log line)",
       ask([](v1::AskRequest& a) { a.set_worker("w\nts=0 event=tell"); }), kInvalid, {"worker", "control character"}},
      {"ask: worker with a leading blank", ask([](v1::AskRequest& a) { a.set_worker(" w"); }), kInvalid,
       {"worker", "blank"}},
      {"ask: no worker", ask([](v1::AskRequest& a) { a.set_worker(""); }), kInvalid, {"worker", "must not be empty"}},
      {"tell: no worker", tell("base", [](v1::TellRequest& t) { t.set_worker(""); }), kInvalid,
       {"worker", "must not be empty"}},
      // Checked before the lease's owner: an empty worker is malformed, not someone else.
      {"renew: no worker", renew([](v1::RenewRequest& r) { r.set_worker(""); }), kInvalid,
       {"worker", "must not be empty"}},
      {"ask: infinite lease", ask([](v1::AskRequest& a) { a.set_lease_seconds(kInf); }), kInvalid,
       {"lease_seconds", "(0, 3600]"}},
      {"ask: lease beyond the limit", ask([](v1::AskRequest& a) { a.set_lease_seconds(3600.5); }), kInvalid,
       {"lease_seconds", "(0, 3600]"}},
      {"ask: request id with a control character", ask([](v1::AskRequest& a) { a.set_request_id("id\x01"); }),
       kInvalid, {"request_id", "printable ASCII"}},
      {"ask: unknown campaign", ask([](v1::AskRequest& a) { a.set_campaign("nope"); }), absl::StatusCode::kNotFound,
       {"campaign", "'nope'"}},

      {"renew: no trials", renew([](v1::RenewRequest& r) { r.clear_trials(); }), kInvalid,
       {"trials", "needs 1..5 trial numbers", "got 0"}},
      {"renew: more trials than the limit",
       renew([](v1::RenewRequest& r) {
         for (int i = 0; i < 5; ++i) r.add_trials(3);
       }),
       kExhausted, {"trials", "at most 5 trial numbers", "got 6"}},
      {"renew: NaN lease", renew([](v1::RenewRequest& r) { r.set_lease_seconds(kNaN); }), kInvalid,
       {"lease_seconds"}},
      {"renew: negative lease", renew([](v1::RenewRequest& r) { r.set_lease_seconds(-5); }), kInvalid,
       {"lease_seconds", "got -5"}},
      {"renew: worker with a DEL", renew([](v1::RenewRequest& r) { r.set_worker("w\x7f"); }), kInvalid,
       {"worker", "control character"}},
      {"renew: bad campaign", renew([](v1::RenewRequest& r) { r.set_campaign("a/b"); }), kInvalid, {"campaign", "'a/b'"}},

      {"tell: more reports than the limit",
       tell("base", [](v1::TellRequest& t) {
         for (int i = 0; i < 3; ++i) *t.add_reports() = t.reports(0);
       }),
       kExhausted, {"reports", "at most 3 reports", "got 4"}},
      {"tell: NaN score in the second report",
       tell("base", [](v1::TellRequest& t) {
         v1::Report* r = t.add_reports();
         r->set_trial(3);
         r->mutable_outcome()->set_score(kNaN);
       }),
       kInvalid, {"reports[1].outcome.score", "finite"}},
      {"tell: note beyond the limit",
       tell("base", [](v1::TellRequest& t) { t.mutable_reports(0)->mutable_outcome()->set_note(std::string(65, 'n')); }),
       kInvalid, {"reports[0].outcome.note", "at most 64 bytes, got 65"}},
      {"tell: empty grade",
       tell("graded", [](v1::TellRequest& t) { t.mutable_reports(0)->mutable_outcome()->set_grade(""); }), kInvalid,
       {"reports[0].outcome.grade", "must not be empty"}},
      {"tell: grade too long",
       tell("graded",
            [](v1::TellRequest& t) { t.mutable_reports(0)->mutable_outcome()->set_grade(std::string(25, 'g')); }),
       kInvalid, {"reports[0].outcome.grade", "at most 24 bytes"}},
      {"tell: grade off the scale",
       tell("graded", [](v1::TellRequest& t) { t.mutable_reports(0)->mutable_outcome()->set_grade("Good"); }),
       kInvalid, {"reports[0].outcome.grade", "'Good' is not on the scale; allowed: poor, fair, good"}},
      {"tell: no outcome", tell("base", [](v1::TellRequest& t) { t.mutable_reports(0)->clear_outcome(); }), kInvalid,
       {"reports[0].outcome", "score, grade, infeasible, void"}},
      {"tell: worker with a carriage return", tell("base", [](v1::TellRequest& t) { t.set_worker("w\r"); }),
       kInvalid, {"worker", "control character"}},
      {"tell: empty campaign", tell("base", [](v1::TellRequest& t) { t.set_campaign(""); }), kInvalid, {"campaign"}},
  });
}

TEST_F(ValidationTest, ReadAndPhaseRequestsAreRefusedNamingTheirPath) {
  auto list = [](std::function<void(v1::ListTrialsRequest&)> mutate) {
    return [mutate](service::Registry& r) {
      v1::ListTrialsRequest request;
      request.set_campaign("base");
      mutate(request);
      return StatusOf(service::ListTrials(r, request));
    };
  };
  auto generations = [](std::function<void(v1::ListGenerationsRequest&)> mutate) {
    return [mutate](service::Registry& r) {
      v1::ListGenerationsRequest request;
      request.set_campaign("base");
      mutate(request);
      return StatusOf(service::ListGenerations(r, request));
    };
  };
  auto phase = [](std::function<void(v1::SetPhaseRequest&)> mutate) {
    return [mutate](service::Registry& r) {
      v1::SetPhaseRequest request;
      request.set_campaign("base");
      request.set_command(v1::PHASE_COMMAND_PAUSE);
      mutate(request);
      return StatusOf(service::SetPhase(r, request, absl::Now()));
    };
  };
  ExpectRefused({
      {"list: unknown state", list([](v1::ListTrialsRequest& l) { l.set_state(static_cast<v1::TrialState>(9)); }),
       kInvalid, {"state", "TRIAL_STATE_LEASED", "got 9"}},
      {"list: negative page size", list([](v1::ListTrialsRequest& l) { l.set_page_size(-1); }), kInvalid,
       {"page_size", "1..200", "got -1"}},
      {"list: page size beyond the limit", list([](v1::ListTrialsRequest& l) { l.set_page_size(201); }), kInvalid,
       {"page_size", "1..200", "got 201"}},
      {"list: foreign page token", list([](v1::ListTrialsRequest& l) { l.set_page_token("page-2"); }), kInvalid,
       {"page_token", "next_page_token"}},
      {"list: negative page token", list([](v1::ListTrialsRequest& l) { l.set_page_token("t-4"); }), kInvalid,
       {"page_token"}},
      {"list: huge page token", list([](v1::ListTrialsRequest& l) { l.set_page_token("t" + std::string(100, '9')); }),
       kInvalid, {"page_token"}},
      {"list: bad campaign", list([](v1::ListTrialsRequest& l) { l.set_campaign("a b"); }), kInvalid, {"campaign"}},
      {"generations: negative page size",
       generations([](v1::ListGenerationsRequest& g) { g.set_page_size(-1); }), kInvalid,
       {"page_size", "0 (100) or in 1..200", "got -1"}},
      {"generations: page size beyond the limit",
       generations([](v1::ListGenerationsRequest& g) { g.set_page_size(201); }), kInvalid,
       {"page_size", "1..200", "got 201"}},
      {"generations: a trial page token",
       generations([](v1::ListGenerationsRequest& g) { g.set_page_token("t4"); }), kInvalid,
       {"page_token", "next_page_token"}},
      {"generations: negative page token",
       generations([](v1::ListGenerationsRequest& g) { g.set_page_token("g-4"); }), kInvalid, {"page_token"}},
      {"generations: huge page token",
       generations([](v1::ListGenerationsRequest& g) { g.set_page_token("g" + std::string(100, '9')); }), kInvalid,
       {"page_token", "not a token this server issued"}},
      {"generations: bad campaign",
       generations([](v1::ListGenerationsRequest& g) { g.set_campaign("base/2"); }), kInvalid,
       {"campaign", "letters, digits"}},
      {"generations: empty campaign", generations([](v1::ListGenerationsRequest& g) { g.set_campaign(""); }), kInvalid,
       {"campaign", "must not be empty"}},
      {"generations: unknown campaign", generations([](v1::ListGenerationsRequest& g) { g.set_campaign("nope"); }),
       absl::StatusCode::kNotFound, {"nope"}},
      {"phase: unspecified command",
       phase([](v1::SetPhaseRequest& p) { p.set_command(v1::PHASE_COMMAND_UNSPECIFIED); }), kInvalid,
       {"command", "PHASE_COMMAND_PAUSE, PHASE_COMMAND_RESUME or PHASE_COMMAND_FINISH", "got 0"}},
      {"phase: unknown command",
       phase([](v1::SetPhaseRequest& p) { p.set_command(static_cast<v1::PhaseCommand>(7)); }), kInvalid,
       {"command", "got 7"}},
      {"phase: request id too long", phase([](v1::SetPhaseRequest& p) { p.set_request_id(std::string(41, 'i')); }),
       kInvalid, {"request_id", "at most 40 bytes"}},
      {"phase: bad campaign", phase([](v1::SetPhaseRequest& p) { p.set_campaign(""); }), kInvalid, {"campaign"}},
      {"get: bad campaign",
       [](service::Registry& r) {
         v1::GetCampaignRequest request;
         request.set_campaign("base\n");
         return StatusOf(service::GetCampaign(r, request));
       },
       kInvalid, {"campaign", "letters, digits"}},
      {"watch: bad campaign",
       [](service::Registry& r) {
         // OgiveService::StreamedWatch calls this before anything is written to the stream.
         v1::WatchRequest request;
         request.set_campaign(std::string(25, 'w'));
         return service::ValidateWatch(request, r.limits());
       },
       kInvalid, {"campaign", "at most 24 bytes"}},
  });
}

TEST(LimitFlagsTest, EveryLimitHasAFlagThatSetsItAndRefusesValuesBelowItsMinimum) {
  const service::ServiceLimits defaults;
  const std::string help = service::LimitFlagsHelp();
  int seen = 0;
  for (const service::LimitFlag& f : service::LimitFlags()) {
    SCOPED_TRACE(f.flag);
    ++seen;
    EXPECT_THAT(help, HasSubstr(absl::StrCat(f.flag, f.seconds ? " DURATION" : " N")));
    EXPECT_THAT(help, HasSubstr(absl::StrCat(f.help, " (default ", defaults.*f.member, f.seconds ? "s" : "", ")")));
    service::ServiceLimits limits;
    ASSERT_TRUE(service::SetLimitFromFlag(limits, f.flag, absl::StrCat(f.min + 7)).ok());
    EXPECT_EQ(limits.*f.member, f.min + 7);
    EXPECT_TRUE(limits.Validate().ok());
    for (const std::string& bad : {absl::StrCat(f.min - 1), std::string("12abc"), std::string(""),
                                  std::string("99999999999")}) {
      const absl::Status s = service::SetLimitFromFlag(limits, f.flag, bad);
      EXPECT_EQ(s.code(), absl::StatusCode::kInvalidArgument) << bad;
      EXPECT_THAT(std::string(s.message()),
                  HasSubstr(f.seconds ? absl::StrCat(f.flag, ": must be ")
                                      : absl::StrCat(f.flag, ": must be a whole number >= ", f.min)));
    }
    if (f.seconds) {  // a duration flag takes units too
      ASSERT_TRUE(service::SetLimitFromFlag(limits, f.flag, "2d").ok());
      EXPECT_EQ(limits.*f.member, 2 * 86400);
      for (const char* fraction : {"1500ms", "90.5s", "0.5"}) {  // whole seconds only: nothing silently cut
        EXPECT_THAT(std::string(service::SetLimitFromFlag(limits, f.flag, fraction).message()),
                    HasSubstr("whole number of seconds"))
            << fraction;
      }
      ASSERT_TRUE(service::SetLimitFromFlag(limits, f.flag, absl::StrCat(f.min + 7, "s")).ok());
    }
    EXPECT_EQ(limits.*f.member, f.min + 7);  // a refused value changes nothing
    limits.*f.member = f.min - 1;
    EXPECT_THAT(limits.Validate().message(), HasSubstr(f.field));
  }
  EXPECT_EQ(seen, 12);  // tls_test.sh checks that ogived --help lists each of them
  service::ServiceLimits limits;
  EXPECT_EQ(service::SetLimitFromFlag(limits, "--max-frobs", "3").code(), absl::StatusCode::kNotFound);
  // The defaults the documentation states (docs/operations.md, "Limits").
  EXPECT_EQ(defaults.max_message_bytes, 4194304);
  EXPECT_EQ(defaults.max_name_bytes, 128);
  EXPECT_EQ(defaults.max_note_bytes, 4096);
  EXPECT_TRUE(defaults.Validate().ok());
}

}  // namespace
}  // namespace ogive
