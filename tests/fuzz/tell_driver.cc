#include "tests/fuzz/tell_driver.h"

#include <algorithm>
#include <cmath>
#include <limits>

#include "absl/strings/numbers.h"
#include "google/protobuf/util/message_differencer.h"
#include "server/codec/design_codec.h"
#include "server/service/handlers.h"
#include "server/service/page_token.h"
#include "tests/fuzz/candidate_check.h"
#include "tests/fuzz/require.h"
#include "tests/support/status_activity.h"

namespace ogive::fuzz {
namespace {

constexpr char kCampaign[] = "fuzz-campaign";
constexpr double kInf = std::numeric_limits<double>::infinity();
constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

const std::string kWorkers[] = {"w1", "w2", "", std::string(129, 'w')};
const std::string kRequestIds[] = {"", "", "r1", "r2", "r3", std::string(129, 'r')};
const double kLeaseSeconds[] = {0, 0, 5, 30, 600, -1, kNaN, kInf, 1e12, 3e6};
const double kAdvanceSeconds[] = {0, 1, 4, 11, 31, 61, 601, 3601, 7201};
const double kScores[] = {0, 1, -1, 2.5, -3, 1e300, -1e300, 5e-324, -0.0, kNaN, kInf, -kInf, 0.5};
const std::string kLabels[] = {"cracked", "poor", "fair", "good", "", "excellent"};
const int kNoteBytes[] = {0, 10, 4096, 4097};

absl::StatusCode CodeOf(int code) { return static_cast<absl::StatusCode>(code); }

bool LeaseOk(double seconds, const service::ServiceLimits& limits) {
  return std::isfinite(seconds) && seconds >= 0 && seconds <= limits.max_lease_seconds;
}

// The status a request gets; a refused one must say why.
// `request` describes the request, only when a check fails.
template <typename T, typename Describe>
absl::StatusCode RequireCode(const absl::StatusOr<T>& got, absl::StatusCode expected, const Describe& request) {
  OGIVE_FUZZ_REQUIRE(got.status().code() == expected, request(), ": expected ", absl::StatusCodeToString(expected),
                     ", got ", got.status().ToString());
  OGIVE_FUZZ_REQUIRE(got.ok() || !got.status().message().empty(), request(), ": refused without a message");
  return got.status().code();
}

}  // namespace

TellDriver::TellDriver(ByteReader& input) : in_(input), now_(absl::FromUnixSeconds(1800000000)) {
  int mask = in_.Byte() & 31;
  if (mask == 0) mask = 1;
  auto add = [this](const char* name) {
    v1::Parameter* p = design_.add_parameters();
    p->set_name(name);
    return p;
  };
  if (mask & 1) {
    v1::RealRange* r = add("temp")->mutable_real();
    r->set_low(-5);
    r->set_high(5);
  }
  if (mask & 2) {
    v1::RealRange* r = add("rate")->mutable_real();
    r->set_low(1e-4);
    r->set_high(1);
    r->set_log(true);
  }
  if (mask & 4) {
    v1::IntegerRange* r = add("passes")->mutable_integer();
    r->set_low(-3);
    r->set_high(7);
  }
  if (mask & 8) {
    v1::Categorical* c = add("glaze")->mutable_categorical();
    for (const char* option : {"ash", "celadon", "tenmoku"}) c->add_options(option);
  }
  if (mask & 16) add("vent")->mutable_flag();
  design_.set_name(kCampaign);
  const int objective = in_.Below(3);
  if (objective == 2) {
    for (int i = 0; i < 4; ++i) design_.mutable_objective()->mutable_grade_scale()->add_labels(kLabels[i]);
  } else {
    design_.mutable_objective()->set_direction(objective == 0 ? v1::DIRECTION_LOWER_IS_BETTER : v1::DIRECTION_HIGHER_IS_BETTER);
  }
  design_.set_population_size(in_.Pick({0, 2, 3, 4, 6}));
  design_.set_expected_workers(in_.Pick({0, 1, 3}));
  design_.set_staleness_limit(in_.Pick({0, 1, 2, 3}));
  design_.set_trial_budget(in_.Pick({0, 0, 8, 20}));
  if (in_.Below(4) == 3) {
    if (objective == 2) {
      design_.set_target_grade("good");
    } else {
      design_.set_target(objective == 0 ? -2.0 : 2.0);
    }
  }
  const uint8_t bits = in_.Byte();
  design_.set_restarts(bits & 1);
  design_.set_lease_seconds(std::vector<double>{0, 10, 60, 3600}[(bits >> 1) & 3]);
  design_.set_gaussian_model(static_cast<v1::GaussianModel>(((bits >> 3) & 3) % 3));
  design_.set_seed(in_.Byte());
}

void TellDriver::Run() {
  registry_ = std::make_unique<service::Registry>(&store_, service::ServiceLimits());
  v1::CreateCampaignRequest create;
  *create.mutable_design() = design_;
  absl::StatusOr<v1::CampaignView> created = service::CreateCampaign(*registry_, create);
  OGIVE_FUZZ_REQUIRE(created.ok(), created.status().ToString(), " for ", design_.ShortDebugString());
  absl::StatusOr<search::Space> space = codec::SpaceFromDesign(design_);
  absl::StatusOr<search::OutcomeOrder> order = codec::OrderFromObjective(design_.objective());
  OGIVE_FUZZ_REQUIRE(space.ok() && order.ok(), "the driver's design does not convert");
  space_ = *std::move(space);
  model_.design = &design_;
  model_.space = &*space_;
  model_.order = *order;
  Refresh();

  for (int op = 0; op < kMaxOperations && !in_.empty(); ++op) {
    switch (in_.Below(8)) {
      case 0:
        Ask();
        break;
      case 1:
        Tell();
        break;
      case 2:
        AskAndTellCohort();
        break;
      case 3:
        Renew();
        break;
      case 4:
        Sweep();
        break;
      case 5:
        SetPhase();
        break;
      case 6:
        ListTrials();
        break;
      case 7:
        Restart();
        break;
    }
    Refresh();
  }
  Restart();  // every input ends with the campaign reloaded from the store
  Refresh();
}

void TellDriver::Refresh() {
  OGIVE_FUZZ_REQUIRE(store_.failed_writes() == 0, "the store refused a write the service made");
  absl::StatusOr<std::shared_ptr<service::CampaignHost>> host = registry_->Find(kCampaign);
  OGIVE_FUZZ_REQUIRE(host.ok(), host.status().ToString());
  stored_ = store_.Peek((*host)->id());
  generations_ = store_.PeekGenerations((*host)->id());
  OGIVE_FUZZ_REQUIRE(stored_ != nullptr && generations_ != nullptr, "the store does not hold the campaign");
  v1::GetCampaignRequest get;
  get.set_campaign(kCampaign);
  absl::StatusOr<v1::CampaignView> view = service::GetCampaign(*registry_, get);
  OGIVE_FUZZ_REQUIRE(view.ok(), view.status().ToString());
  RequireCampaignInvariants(model_, *stored_, *generations_, *view, now_);
}

const v1::TrialRecord* TellDriver::Record(int64_t number) const {
  if (number < 1 || number > stored_->snapshot.trials_size()) return nullptr;
  return &stored_->snapshot.trials(static_cast<int>(number - 1));
}

int64_t TellDriver::PickTrial() {
  const int64_t total = stored_->snapshot.trials_size();
  const uint8_t b = in_.Byte();
  if (total == 0 || b >= 240) {
    const int64_t odd[] = {0, -1, total + 1, std::numeric_limits<int64_t>::max()};
    return odd[b % 4];
  }
  return 1 + b % total;
}

v1::Outcome TellDriver::PickOutcome() {
  v1::Outcome o;
  switch (in_.Below(8)) {
    case 0:
    case 1:
    case 2: {
      const int i = in_.Below(14);
      o.set_score(i < 13 ? kScores[i] : in_.RawDouble());
      break;
    }
    case 3:
      o.set_grade(in_.Pick(kLabels));
      break;
    case 4:
      o.mutable_infeasible();
      break;
    case 5:
      o.mutable_void_();
      break;
    case 6:
      break;  // no outcome at all
    case 7:
      o.set_score(1.0);
      o.set_note(std::string(in_.Pick(kNoteBytes), 'n'));
      break;
  }
  return o;
}

absl::Duration TellDriver::LeaseFor(double seconds) const {
  if (seconds > 0) return absl::Seconds(seconds);
  return design_.lease_seconds() > 0 ? absl::Seconds(design_.lease_seconds()) : absl::Hours(1);
}

void TellDriver::Ask() {
  v1::AskRequest r;
  r.set_campaign(kCampaign);
  const uint8_t b = in_.Byte();
  r.set_count(b < 240 ? 1 + b % 8 : std::vector<int>{0, -1, 1000, 1001}[b % 4]);
  r.set_worker(in_.Pick(kWorkers));
  r.set_lease_seconds(in_.Pick(kLeaseSeconds));
  r.set_request_id(in_.Pick(kRequestIds));
  SendAsk(r);
}

std::optional<v1::AskResponse> TellDriver::SendAsk(const v1::AskRequest& r) {
  const service::ServiceLimits& limits = registry_->limits();
  const v1::EngineState& engine = stored_->snapshot.engine();
  const int64_t total = stored_->snapshot.trials_size();
  const auto what = [&r] { return absl::StrCat("ask ", r.ShortDebugString()); };
  absl::StatusCode expected = absl::StatusCode::kOk;
  std::vector<int64_t> numbers;
  const bool retry = !r.request_id().empty() && ask_requests_.count(r.request_id()) > 0;
  // The count is checked right after the campaign name (always valid here): below 1 it is malformed,
  // above the server's limit RESOURCE_EXHAUSTED; every other bad field is INVALID_ARGUMENT.
  if (r.count() > limits.max_ask_count) {
    expected = absl::StatusCode::kResourceExhausted;
  } else if (r.count() < 1 || r.worker().empty() || static_cast<int>(r.worker().size()) > limits.max_name_bytes ||
             static_cast<int>(r.request_id().size()) > limits.max_name_bytes || !LeaseOk(r.lease_seconds(), limits)) {
    expected = absl::StatusCode::kInvalidArgument;
  } else if (retry) {
    numbers = ask_requests_[r.request_id()];
  } else if (engine.phase() != v1::CAMPAIGN_PHASE_OPEN) {
    expected = absl::StatusCode::kFailedPrecondition;
  } else {
    int64_t n = r.count();
    if (design_.trial_budget() > 0) {
      int64_t outstanding = 0;
      for (const v1::TrialRecord& t : stored_->snapshot.trials()) {
        if (t.state() == v1::TRIAL_STATE_LEASED && t.lease_deadline_ns() > absl::ToUnixNanos(now_)) ++outstanding;
      }
      const int64_t room = design_.trial_budget() - engine.informative() - outstanding;
      if (room <= 0) expected = absl::StatusCode::kFailedPrecondition;
      n = std::min(n, room);
    }
    for (int64_t k = 1; k <= n; ++k) numbers.push_back(total + k);
  }

  const int64_t writes = store_.committed_writes();
  absl::StatusOr<v1::AskResponse> got = service::Ask(*registry_, r, now_);
  RequireCode(got, expected, what);
  if (!got.ok()) {
    OGIVE_FUZZ_REQUIRE(store_.committed_writes() == writes, what(), ": refused but stored something");
    return std::nullopt;
  }
  OGIVE_FUZZ_REQUIRE(got->trials_size() == static_cast<int>(numbers.size()), what(), ": expected ", numbers.size(),
                     " trials, got ", got->ShortDebugString());
  const int64_t deadline_ms = absl::ToUnixMillis(now_ + LeaseFor(r.lease_seconds()));
  for (int k = 0; k < got->trials_size(); ++k) {
    const v1::Trial& t = got->trials(k);
    OGIVE_FUZZ_REQUIRE(t.number() == numbers[k], what(), ": trial ", k, " is ", t.number(), ", expected ", numbers[k]);
    RequireCandidateInDesign(t.candidate(), design_);
    if (retry) continue;
    OGIVE_FUZZ_REQUIRE(t.state() == v1::TRIAL_STATE_LEASED && t.worker() == r.worker() &&
                           t.generation() == engine.generation() && t.lease_deadline_unix_ms() == deadline_ms &&
                           !t.has_outcome(),
                       what(), ": ", t.ShortDebugString(), " (deadline expected ", deadline_ms, ")");
  }
  if (!retry && !r.request_id().empty()) ask_requests_[r.request_id()] = numbers;
  return *std::move(got);
}

void TellDriver::Tell() {
  v1::TellRequest r;
  r.set_campaign(kCampaign);
  r.set_worker(in_.Pick(kWorkers));
  const int n = in_.Below(5);
  for (int k = 0; k < n; ++k) {
    v1::Report* report = r.add_reports();
    report->set_trial(PickTrial());
    *report->mutable_outcome() = PickOutcome();
  }
  SendTell(r);
}

void TellDriver::SendTell(const v1::TellRequest& r) {
  const service::ServiceLimits& limits = registry_->limits();
  const auto what = [&r] { return absl::StrCat("tell ", r.ShortDebugString().substr(0, 2000)); };
  const auto& labels = design_.objective().grade_scale().labels();
  bool valid = r.reports_size() >= 1 && r.reports_size() <= limits.max_reports_per_tell &&
               !r.worker().empty() && static_cast<int>(r.worker().size()) <= limits.max_name_bytes;
  std::vector<search::Outcome> outcomes;
  for (const v1::Report& report : r.reports()) {
    const v1::Outcome& o = report.outcome();
    valid = valid && static_cast<int>(o.note().size()) <= limits.max_note_bytes;
    switch (o.kind_case()) {
      case v1::Outcome::kScore:
        valid = valid && !model_.order.graded && std::isfinite(o.score());
        outcomes.push_back(search::Outcome::Score(o.score()));
        break;
      case v1::Outcome::kGrade: {
        const int index = static_cast<int>(std::find(labels.begin(), labels.end(), o.grade()) - labels.begin());
        valid = valid && model_.order.graded && index < labels.size();
        outcomes.push_back(search::Outcome::Grade(index));
        break;
      }
      case v1::Outcome::kInfeasible:
        outcomes.push_back(search::Outcome::Infeasible());
        break;
      case v1::Outcome::kVoid:
        outcomes.push_back(search::Outcome::Void());
        break;
      case v1::Outcome::KIND_NOT_SET:
        valid = false;
        outcomes.push_back(search::Outcome::Void());
        break;
    }
  }

  // Each report's result, in order: later reports of a request see the earlier ones.
  struct Expected {
    absl::StatusCode code = absl::StatusCode::kOk;
    bool duplicate = false;
    bool late = false;
  };
  std::vector<Expected> expected(r.reports_size());
  std::map<int64_t, search::Outcome> reported = model_.reported;
  for (int k = 0; k < r.reports_size(); ++k) {
    const int64_t number = r.reports(k).trial();
    const v1::TrialRecord* before = Record(number);
    const search::Outcome& outcome = outcomes[k];
    if (before == nullptr) {
      expected[k].code = absl::StatusCode::kNotFound;
    } else if (const auto told = reported.find(number); told != reported.end()) {
      const search::Outcome& first = told->second;
      const bool same = first.kind == outcome.kind &&
                        (first.kind != search::Outcome::Kind::kScore || first.score == outcome.score) &&
                        (first.kind != search::Outcome::Kind::kGrade || first.grade == outcome.grade);
      if (same) {
        expected[k].duplicate = true;
        expected[k].late = before->late() || before->state() == v1::TRIAL_STATE_LAPSED ||
                           (before->state() == v1::TRIAL_STATE_LEASED &&
                            before->lease_deadline_ns() <= absl::ToUnixNanos(now_));
      } else {
        expected[k].code = absl::StatusCode::kAlreadyExists;
      }
    } else {
      expected[k].late = before->state() == v1::TRIAL_STATE_LAPSED ||
                         (before->state() == v1::TRIAL_STATE_LEASED &&
                          before->lease_deadline_ns() <= absl::ToUnixNanos(now_));
      reported[number] = outcome;
    }
  }

  const int64_t writes = store_.committed_writes();
  absl::StatusOr<v1::TellResponse> got = service::Tell(*registry_, r, now_);
  RequireCode(got, valid ? absl::StatusCode::kOk : absl::StatusCode::kInvalidArgument, what);
  if (!got.ok()) {
    OGIVE_FUZZ_REQUIRE(store_.committed_writes() == writes, what(), ": refused but stored something");
    return;
  }
  OGIVE_FUZZ_REQUIRE(got->results_size() == r.reports_size(), what(), ": ", got->ShortDebugString());
  for (int k = 0; k < r.reports_size(); ++k) {
    const v1::ReportResult& result = got->results(k);
    const Expected& e = expected[k];
    OGIVE_FUZZ_REQUIRE(result.trial() == r.reports(k).trial() && CodeOf(result.code()) == e.code &&
                           (e.code != absl::StatusCode::kOk || (result.duplicate() == e.duplicate &&
                                                                result.late() == e.late)),
                       what(), ": report ", k, " -> ", result.ShortDebugString(), "; expected ",
                       absl::StatusCodeToString(e.code), e.duplicate ? " duplicate" : "", e.late ? " late" : "");
  }
  model_.reported = std::move(reported);
  OGIVE_FUZZ_REQUIRE(store_.committed_writes() == writes + 1, what(), ": one write expected");
}

void TellDriver::AskAndTellCohort() {
  v1::GetCampaignRequest get;
  get.set_campaign(kCampaign);
  absl::StatusOr<v1::CampaignView> view = service::GetCampaign(*registry_, get);
  OGIVE_FUZZ_REQUIRE(view.ok(), view.status().ToString());
  v1::AskRequest ask;
  ask.set_campaign(kCampaign);
  ask.set_worker("cohort");
  ask.set_count(std::min(view->status().population_size(), 16));
  std::optional<v1::AskResponse> asked = SendAsk(ask);
  if (!asked.has_value()) return;
  Refresh();  // the tell is predicted from the state after the ask
  // Outcomes base + k * step: step 0 ties the whole cohort (a plateau), others rank it.
  const double base = in_.Pick({0.0, 1.0, -1.0, 0.5});
  const double step = in_.Pick({0.0, 0.0, 1.0, -1.0, 0.25});
  const int infeasible_every = in_.Pick({0, 0, 2, 3});
  const auto& labels = design_.objective().grade_scale().labels();
  v1::TellRequest tell;
  tell.set_campaign(kCampaign);
  tell.set_worker("cohort");
  for (int k = 0; k < asked->trials_size(); ++k) {
    v1::Report* report = tell.add_reports();
    report->set_trial(asked->trials(k).number());
    v1::Outcome* o = report->mutable_outcome();
    if (infeasible_every > 0 && k % infeasible_every == 0) {
      o->mutable_infeasible();
    } else if (model_.order.graded) {
      const int index = static_cast<int>(std::abs(base + k * step)) % labels.size();
      o->set_grade(labels[index]);
    } else {
      o->set_score(base + k * step);
    }
  }
  SendTell(tell);
}

void TellDriver::Renew() {
  v1::RenewRequest r;
  r.set_campaign(kCampaign);
  const int n = in_.Byte() >= 250 ? 0 : 1 + in_.Below(3);
  for (int k = 0; k < n; ++k) r.add_trials(PickTrial());
  r.set_worker(in_.Pick(kWorkers));
  r.set_lease_seconds(in_.Pick(kLeaseSeconds));
  const service::ServiceLimits& limits = registry_->limits();
  const auto what = [&r] { return absl::StrCat("renew ", r.ShortDebugString()); };

  absl::StatusCode expected = absl::StatusCode::kOk;
  if (n < 1 || r.worker().empty() || static_cast<int>(r.worker().size()) > limits.max_name_bytes ||
      !LeaseOk(r.lease_seconds(), limits)) {
    expected = absl::StatusCode::kInvalidArgument;
  } else {
    for (int64_t number : r.trials()) {
      const v1::TrialRecord* t = Record(number);
      if (t == nullptr) {
        expected = absl::StatusCode::kNotFound;
      } else if (t->outcome_kind() != v1::OUTCOME_KIND_UNSPECIFIED ||
                 (!t->worker().empty() && t->worker() != r.worker())) {
        expected = absl::StatusCode::kFailedPrecondition;
      }
      if (expected != absl::StatusCode::kOk) break;
    }
  }
  const int64_t writes = store_.committed_writes();
  absl::StatusOr<v1::RenewResponse> got = service::Renew(*registry_, r, now_);
  RequireCode(got, expected, what);
  if (!got.ok()) {
    OGIVE_FUZZ_REQUIRE(store_.committed_writes() == writes, what(), ": refused but stored something");
    return;
  }
  const int64_t deadline_ms = absl::ToUnixMillis(now_ + LeaseFor(r.lease_seconds()));
  OGIVE_FUZZ_REQUIRE(got->trials_size() == n, what(), ": ", got->ShortDebugString());
  for (const v1::Trial& t : got->trials()) {
    OGIVE_FUZZ_REQUIRE(t.state() == v1::TRIAL_STATE_LEASED && t.worker() == r.worker() &&
                           t.lease_deadline_unix_ms() == deadline_ms,
                       what(), ": ", t.ShortDebugString());
  }
}

void TellDriver::Sweep() {
  now_ += absl::Seconds(in_.Pick(kAdvanceSeconds));
  if (in_.Bit()) return;  // time passes without a sweep; the next request lapses what ran out
  int64_t expected = 0;
  for (const v1::TrialRecord& t : stored_->snapshot.trials()) {
    if (t.state() == v1::TRIAL_STATE_LEASED && t.lease_deadline_ns() <= absl::ToUnixNanos(now_)) ++expected;
  }
  absl::StatusOr<std::shared_ptr<service::CampaignHost>> host = registry_->Find(kCampaign);
  OGIVE_FUZZ_REQUIRE(host.ok(), host.status().ToString());
  absl::StatusOr<int> lapsed = (*host)->Sweep(now_);
  OGIVE_FUZZ_REQUIRE(lapsed.ok() && *lapsed == expected, "sweep: expected ", expected, " lapses, got ",
                     lapsed.ok() ? absl::StrCat(*lapsed) : lapsed.status().ToString());
}

void TellDriver::SetPhase() {
  v1::SetPhaseRequest r;
  r.set_campaign(kCampaign);
  r.set_command(in_.Pick({v1::PHASE_COMMAND_UNSPECIFIED, v1::PHASE_COMMAND_PAUSE, v1::PHASE_COMMAND_RESUME,
                          v1::PHASE_COMMAND_FINISH, static_cast<v1::PhaseCommand>(7)}));
  const v1::EngineState& engine = stored_->snapshot.engine();
  const bool done = engine.phase() == v1::CAMPAIGN_PHASE_DONE;
  absl::StatusCode expected = absl::StatusCode::kOk;
  v1::CampaignPhase phase = engine.phase();
  v1::DoneReason reason = engine.reason();
  switch (r.command()) {
    case v1::PHASE_COMMAND_PAUSE:
      if (done) expected = absl::StatusCode::kFailedPrecondition;
      phase = v1::CAMPAIGN_PHASE_PAUSED;
      break;
    case v1::PHASE_COMMAND_RESUME:
      if (done) expected = absl::StatusCode::kFailedPrecondition;
      phase = v1::CAMPAIGN_PHASE_OPEN;
      break;
    case v1::PHASE_COMMAND_FINISH:
      phase = v1::CAMPAIGN_PHASE_DONE;
      if (!done) reason = v1::DONE_REASON_STOPPED;
      break;
    default:
      expected = absl::StatusCode::kInvalidArgument;
  }
  const auto what = [&r] { return absl::StrCat("set phase ", r.ShortDebugString()); };
  const int64_t writes = store_.committed_writes();
  absl::StatusOr<v1::CampaignView> got = service::SetPhase(*registry_, r, now_);
  RequireCode(got, expected, what);
  if (!got.ok()) {
    OGIVE_FUZZ_REQUIRE(store_.committed_writes() == writes, what(), ": refused but stored something");
    return;
  }
  OGIVE_FUZZ_REQUIRE(got->status().phase() == phase && got->status().reason() == reason, what(), ": ",
                     got->status().ShortDebugString());
}

void TellDriver::ListTrials() {
  v1::ListTrialsRequest r;
  r.set_campaign(kCampaign);
  r.set_page_size(in_.Pick({0, 1, 2, 5, -1, 1001}));
  r.set_state(in_.Pick({v1::TRIAL_STATE_UNSPECIFIED, v1::TRIAL_STATE_LEASED, v1::TRIAL_STATE_REPORTED,
                        v1::TRIAL_STATE_LAPSED, v1::TRIAL_STATE_VOIDED, static_cast<v1::TrialState>(9)}));
  // Tokens of this listing, and tokens of another campaign, another state filter or another
  // listing, forged ones and a negative position: only the first kind is accepted.
  const std::string filter = absl::StrCat(static_cast<int>(r.state()));
  const service::PageScope scope{'t', kCampaign, filter};
  struct TokenChoice {
    std::string token;
    int64_t after;
    bool ok;
  };
  const TokenChoice tokens[] = {
      {"", 0, true},
      {"", 0, true},
      {service::MakePageToken(scope, "0"), 0, true},
      {service::MakePageToken(scope, "2"), 2, true},
      {service::MakePageToken(scope, "-1"), 0, false},
      {service::MakePageToken({'t', "other-campaign", filter}, "2"), 0, false},
      {service::MakePageToken({'t', kCampaign, absl::StrCat(filter, "0")}, "2"), 0, false},
      {service::MakePageToken({'g', kCampaign, ""}, "2"), 0, false},
      {"t2", 0, false},
      {"x7", 0, false},
      {"t99999999999999999999", 0, false}};
  const TokenChoice& token = in_.Pick(tokens);
  r.set_page_token(token.token);
  const int64_t after = token.after;
  const bool token_ok = token.ok;
  const bool valid = r.page_size() >= 0 && r.page_size() <= registry_->limits().max_page_size && token_ok &&
                     v1::TrialState_IsValid(r.state());
  const auto what = [&r] { return absl::StrCat("list trials ", r.ShortDebugString()); };

  std::vector<const v1::TrialRecord*> expected;
  for (const v1::TrialRecord& t : stored_->snapshot.trials()) {
    if (t.number() > after && (r.state() == v1::TRIAL_STATE_UNSPECIFIED || t.state() == r.state())) {
      expected.push_back(&t);
    }
  }
  size_t seen = 0;
  for (int page = 0;; ++page) {
    absl::StatusOr<v1::ListTrialsResponse> got = service::ListTrials(*registry_, r);
    RequireCode(got, valid ? absl::StatusCode::kOk : absl::StatusCode::kInvalidArgument, what);
    if (!got.ok()) return;
    const int limit = r.page_size() == 0 ? 100 : r.page_size();
    OGIVE_FUZZ_REQUIRE(got->trials_size() <= limit, what(), ": page of ", got->trials_size());
    for (const v1::Trial& t : got->trials()) {
      OGIVE_FUZZ_REQUIRE(seen < expected.size(), what(), ": more trials than stored");
      RequireTrialViewMatches(model_, t, *expected[seen++]);
    }
    if (got->next_page_token().empty()) break;
    OGIVE_FUZZ_REQUIRE(page <= stored_->snapshot.trials_size() && got->trials_size() > 0, what(),
                       ": pages do not end");
    r.set_page_token(got->next_page_token());
  }
  OGIVE_FUZZ_REQUIRE(seen == expected.size(), what(), ": listed ", seen, " of ", expected.size(), " trials");
}

void TellDriver::Restart() {
  auto restarted = std::make_unique<service::Registry>(&store_, service::ServiceLimits());
  absl::Status loaded = restarted->LoadAll();
  OGIVE_FUZZ_REQUIRE(loaded.ok(), "restart: ", loaded.ToString());
  v1::GetCampaignRequest get;
  get.set_campaign(kCampaign);
  absl::StatusOr<v1::CampaignView> before = service::GetCampaign(*registry_, get);
  absl::StatusOr<v1::CampaignView> after = service::GetCampaign(*restarted, get);
  OGIVE_FUZZ_REQUIRE(before.ok() && after.ok(), "restart: the campaign is gone");
  // Recent activity (workers seen, reports in the last hour) is kept in memory and dated by the clock:
  // a restart rebuilds it from the stored reports only, so it is not compared.
  for (v1::CampaignView* view : {&*before, &*after}) {
    testing::ClearActivity(view->mutable_status());
  }
  OGIVE_FUZZ_REQUIRE(google::protobuf::util::MessageDifferencer::Equals(*before, *after),
                     "restart: the campaign reloaded from the store differs:\n", before->ShortDebugString(), "\nvs\n",
                     after->ShortDebugString());
  registry_ = std::move(restarted);
}

}  // namespace ogive::fuzz
