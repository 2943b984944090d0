#include "server/service/campaign_host.h"

#include <algorithm>
#include <cmath>
#include <optional>
#include <utility>

#include "absl/strings/str_cat.h"
#include "server/base/reason.h"
#include "server/codec/design_codec.h"
#include "server/codec/marginal_codec.h"
#include "server/codec/state_codec.h"
#include "server/codec/campaign_codec.h"
#include "server/service/service_metrics.h"

namespace ogive::service {
namespace {

int64_t UnixMillis(absl::Time t) { return absl::ToUnixMillis(t); }


}  // namespace

CampaignHost::CampaignHost(int64_t id, v1::CampaignDesign design, campaign::Campaign campaign, storage::Store* store,
                     CommitWaiter* waiter, std::string create_request_id,
                     AskRequestIndex ask_requests, ServiceMetrics* metrics,
                     std::function<absl::Time()> clock)
    : id_(id),
      design_(std::move(design)),
      create_request_id_(std::move(create_request_id)),
      store_(store),
      waiter_(waiter),
      metrics_(metrics),
      space_(campaign.space()),
      campaign_(std::move(campaign)),
      ask_requests_(std::move(ask_requests)),
      clock_(std::move(clock)) {
  // Rebuild the recent activity from the stored reports (asks and renewals are not stored).
  const absl::Time since = clock_() - absl::Hours(1);
  std::vector<std::pair<absl::Time, std::string>> reports;
  for (int64_t n = 1; n <= campaign_.trial_count(); ++n) {
    const campaign::Trial& t = *campaign_.trial(n);
    if (!t.outcome.has_value() || t.reported_at <= since) continue;
    reports.emplace_back(t.reported_at, t.worker);
  }
  std::sort(reports.begin(), reports.end());
  for (auto& [at, worker] : reports) {
    absl::Time& seen = last_seen_[worker];
    seen = std::max(seen, at);
    recent_reports_.emplace_back(at, std::move(worker));
  }
}

void CampaignHost::NoteActivity(const std::string& worker, absl::Time now, int reports) {
  absl::Time& seen = last_seen_[worker];
  seen = std::max(seen, now);
  for (int i = 0; i < reports; ++i) recent_reports_.emplace_back(now, worker);
  const absl::Time since = now - absl::Hours(1);
  while (!recent_reports_.empty() && recent_reports_.front().first <= since) recent_reports_.pop_front();
  // Workers not seen for an hour are forgotten, in one pass a minute at most (not on every request
  // once many workers were seen).
  if (last_seen_.size() > 1000 && now >= next_forget_) {
    absl::erase_if(last_seen_, [&](const auto& entry) { return entry.second <= since; });
    next_forget_ = now + absl::Minutes(1);
  }
}

CampaignHost::Queued CampaignHost::ApplyAndQueue(campaign::Change change, std::vector<storage::Event> events,
                                           std::optional<std::pair<std::string, std::vector<int64_t>>> ask_request,
                                           absl::Time now, const std::string& token_label) {
  storage::CampaignWrite write;
  write.campaign_id = id_;
  write.chain = chain_;
  // Leases that ran out, whichever request found them (the sweeper, or an ask, tell, renewal or phase
  // change that swept first): the event log records every lapse, before what the request did.
  std::vector<storage::Event> lapses;
  for (const auto& [number, worker] : change.lapsed) {
    lapses.push_back({"lapse", number, worker, "", absl::ToUnixNanos(now)});
  }
  events.insert(events.begin(), lapses.begin(), lapses.end());
  for (const campaign::Trial& t : change.trials) write.trials.push_back(codec::TrialToProto(t));
  write.engine = codec::EngineStateToProto(change.engine, /*include_distribution=*/false);
  if (change.distribution_changed) {
    write.distribution = codec::DistributionStateToProto(change.engine.distribution->state());
  }
  for (const campaign::GenerationRecord& g : change.generations) {
    write.generations.push_back(codec::GenerationToProto(g, now));
    events.push_back({"update", 0, "", absl::StrCat("generation ", g.generation, " from ", g.cohort.size(),
                                                    " outcomes, mean staleness ", g.mean_staleness),
                      absl::ToUnixNanos(now)});
  }
  if (change.engine.phase != campaign_.engine().phase || change.engine.epoch != campaign_.engine().epoch) {
    events.push_back({"phase", 0, "",
                      absl::StrCat(campaign::PhaseName(change.engine.phase), " ",
                                   campaign::DoneReasonName(change.engine.reason), " ", change.engine.phase_message),
                      absl::ToUnixNanos(now)});
  }
  write.ask_request = ask_request;
  // The caller's token is behind what the request did, not behind the lapses it found.
  for (size_t i = lapses.size(); i < events.size(); ++i) events[i].token_label = token_label;
  write.events = std::move(events);
  ChangeTally tally = TallyChange(campaign_, change);
  campaign_.Apply(std::move(change));
  if (ask_request.has_value()) ask_requests_.insert(*std::move(ask_request));
  ++version_;
  return Queued{store_->CommitAsync(std::move(write)), chain_, tally};
}

absl::Status CampaignHost::Await(Queued queued) {
  const absl::Status committed = queued.pending->Wait();
  return AfterCommit(queued.chain, queued.tally, committed);
}

template <typename Response>
void CampaignHost::ReplyAfterCommit(Queued queued, Response response, Reply<Response> reply) {
  waiter_->Add(std::move(queued.pending),
               [this, chain = queued.chain, tally = queued.tally, response = std::move(response),
                reply = std::move(reply)](absl::Status committed) mutable {
                 const absl::Status status = AfterCommit(chain, tally, std::move(committed));
                 if (status.ok()) {
                   reply(std::move(response));
                 } else {
                   reply(status);
                 }
               });
}

absl::Status CampaignHost::AfterCommit(int64_t chain, const ChangeTally& tally, absl::Status committed) {
  if (committed.ok()) {
    if (metrics_ != nullptr && !tally.empty()) metrics_->ObserveCommitted(tally);
    return committed;
  }
  absl::MutexLock lock(&mu_);
  if (chain != chain_) return committed;  // another request reloaded already
  // Memory ran ahead of disk: go back to what the store holds.
  ++chain_;
  ++version_;
  absl::StatusOr<storage::StoredCampaign> stored = store_->LoadCampaign(id_);
  absl::StatusOr<campaign::CampaignSnapshot> snapshot =
      stored.ok() ? codec::SnapshotFromProto(stored->snapshot, campaign_.space()) : stored.status();
  absl::StatusOr<campaign::Campaign> restored =
      snapshot.ok() ? campaign::Campaign::Restore(campaign_.space(), campaign_.order(), campaign_.distribution_options(),
                                            campaign_.options(), *std::move(snapshot))
                    : snapshot.status();
  if (!restored.ok()) {
    broken_ = absl::UnavailableError(absl::StrCat("campaign '", name(), "' could not be reloaded after a failed write: ",
                                                  restored.status().message()));
    return committed;
  }
  campaign_ = *std::move(restored);
  ask_requests_.clear();
  ask_requests_.insert(stored->ask_requests.begin(), stored->ask_requests.end());
  broken_ = absl::OkStatus();
  return committed;
}

absl::Status CampaignHost::Usable() const { return broken_; }

void CampaignHost::Ask(int count, const std::string& worker, std::optional<absl::Duration> lease,
                    const std::string& request_id, absl::Time now, const std::string& token_label,
                    Reply<v1::AskResponse> reply) {
  Queued queued;
  v1::AskResponse response;
  {
    absl::MutexLock lock(&mu_);
    if (absl::Status s = Usable(); !s.ok()) return reply(s);
    std::vector<int64_t> numbers;
    if (auto it = ask_requests_.find(request_id); !request_id.empty() && it != ask_requests_.end()) {
      // A retry: the same trials again, answered only once the original's write (queued earlier in
      // this campaign's chain) has committed — an empty write behind it waits for exactly that.
      numbers = it->second;
      storage::CampaignWrite barrier;
      barrier.campaign_id = id_;
      barrier.chain = chain_;
      queued = Queued{store_->CommitAsync(std::move(barrier)), chain_, ChangeTally{}};
    } else {
      absl::StatusOr<campaign::AskPlan> plan = campaign_.PlanAsk(count, worker, lease, now);
      if (!plan.ok()) return reply(plan.status());
      numbers = plan->trials;
      std::vector<storage::Event> events;
      for (int64_t n : numbers) events.push_back({"ask", n, worker, "", absl::ToUnixNanos(now)});
      std::optional<std::pair<std::string, std::vector<int64_t>>> ask_request;
      if (!request_id.empty()) ask_request = std::make_pair(request_id, numbers);
      queued = ApplyAndQueue(std::move(plan->change), std::move(events), std::move(ask_request), now, token_label);
    }
    for (int64_t n : numbers) *response.add_trials() = TrialView(*campaign_.trial(n));
    NoteActivity(worker, now, 0);
  }
  ReplyAfterCommit(std::move(queued), std::move(response), std::move(reply));
}

void CampaignHost::Tell(const std::vector<campaign::Report>& reports, const std::string& worker, absl::Time now,
                     const std::string& token_label, Reply<v1::TellResponse> reply) {
  Queued queued;
  v1::TellResponse response;
  {
    absl::MutexLock lock(&mu_);
    if (absl::Status s = Usable(); !s.ok()) return reply(s);
    absl::StatusOr<campaign::TellPlan> plan = campaign_.PlanTell(reports, now);
    if (!plan.ok()) return reply(plan.status());
    std::vector<storage::Event> events;
    int stored = 0;
    for (const campaign::ReportResult& r : plan->results) {
      v1::ReportResult* out = response.add_results();
      out->set_trial(r.trial);
      out->set_code(static_cast<int>(r.status.code()));
      out->set_message(std::string(r.status.message()));
      if (std::optional<Reason> why = ReasonOf(r.status); why.has_value()) out->set_reason(why->reason);
      out->set_duplicate(r.duplicate);
      out->set_late(r.late);
      if (r.status.ok() && !r.duplicate) {
        events.push_back({"tell", r.trial, worker, r.late ? "late" : "", absl::ToUnixNanos(now)});
        ++stored;
      }
    }
    NoteActivity(worker, now, stored);
    queued = ApplyAndQueue(std::move(plan->change), std::move(events), std::nullopt, now, token_label);
    response.set_generation(campaign_.engine().generation);
    response.set_phase(codec::PhaseToProto(campaign_.engine().phase));
  }
  ReplyAfterCommit(std::move(queued), std::move(response), std::move(reply));
}

absl::StatusOr<v1::RenewResponse> CampaignHost::Renew(const std::vector<int64_t>& trials, const std::string& worker,
                                                   std::optional<absl::Duration> lease, absl::Time now) {
  Queued queued;
  v1::RenewResponse response;
  {
    absl::MutexLock lock(&mu_);
    if (absl::Status s = Usable(); !s.ok()) return s;
    absl::StatusOr<campaign::Change> change = campaign_.PlanRenew(trials, worker, lease, now);
    if (!change.ok()) return change.status();
    queued = ApplyAndQueue(*std::move(change), {}, std::nullopt, now, "");
    for (int64_t n : trials) *response.add_trials() = TrialView(*campaign_.trial(n));
    NoteActivity(worker, now, 0);
  }
  if (absl::Status s = Await(std::move(queued)); !s.ok()) return s;
  return response;
}

absl::StatusOr<v1::CampaignView> CampaignHost::SetPhase(campaign::PhaseCommand command, absl::Time now,
                                                  const std::string& token_label) {
  Queued queued;
  v1::CampaignView view;
  {
    absl::MutexLock lock(&mu_);
    if (absl::Status s = Usable(); !s.ok()) return s;
    absl::StatusOr<campaign::Change> change = campaign_.PlanSetPhase(command, now);
    if (!change.ok()) return change.status();
    queued = ApplyAndQueue(*std::move(change), {}, std::nullopt, now, token_label);
    view = ViewLocked(false);
  }
  if (absl::Status s = Await(std::move(queued)); !s.ok()) return s;
  return view;
}

absl::StatusOr<int> CampaignHost::Sweep(absl::Time now) {
  Queued queued;
  int lapsed = 0;
  {
    absl::MutexLock lock(&mu_);
    if (absl::Status s = Usable(); !s.ok()) return s;
    campaign::Change change = campaign_.PlanSweep(now);
    if (change.trials.empty()) return 0;
    lapsed = static_cast<int>(change.trials.size());
    queued = ApplyAndQueue(std::move(change), {}, std::nullopt, now, "");  // the lapse events come with it
  }
  if (absl::Status s = Await(std::move(queued)); !s.ok()) return s;
  return lapsed;
}

v1::Trial CampaignHost::TrialView(const campaign::Trial& t) const {
  v1::Trial v;
  v.set_number(t.number);
  *v.mutable_candidate() = codec::CandidateToProto(campaign_.space().Decode(t.x), campaign_.space());
  v.set_generation(t.generation);
  v.set_state(codec::TrialStateToProto(t.state));
  v.set_worker(t.worker);
  v.set_lease_deadline_unix_ms(UnixMillis(t.lease_deadline));
  if (t.outcome.has_value()) {
    *v.mutable_outcome() = codec::OutcomeToProto(*t.outcome, design_.objective());
    v.mutable_outcome()->set_note(t.note);
    v.set_reported_at_unix_ms(UnixMillis(t.reported_at));
    v.set_reported_by(t.reported_by);
  }
  v.set_late(t.late);
  v.set_use(codec::OutcomeUseToProto(t.use));
  v.set_consumed_by(t.consumed_by);
  v.set_replicate_of(t.replicate_of);
  return v;
}

v1::CampaignView CampaignHost::View(bool brief, int64_t* version) const {
  absl::ReaderMutexLock lock(&mu_);
  if (version != nullptr) *version = version_;
  return ViewLocked(brief);
}

v1::CampaignView CampaignHost::ViewLocked(bool brief) const {
  v1::CampaignView view;
  view.set_name(design_.name());
  if (!brief) *view.mutable_design() = design_;
  v1::StatusSummary* s = view.mutable_status();
  const campaign::EngineState& e = campaign_.engine();
  s->set_phase(codec::PhaseToProto(e.phase));
  s->set_reason(codec::DoneReasonToProto(e.reason));
  s->set_phase_message(e.phase_message);
  s->set_generation(e.generation);
  s->set_restarts(e.epoch);
  s->set_population_size(campaign_.distribution().population_size());
  const campaign::TrialCounts& c = campaign_.counts();
  s->set_leased(c.leased);
  s->set_reported(c.reported);
  s->set_lapsed(c.lapsed);
  s->set_voided(c.voided);
  s->set_late(c.late);
  s->set_pending(c.pending);
  s->set_consumed(c.consumed);
  s->set_too_stale(c.too_stale);
  s->set_awaiting_replicates(c.awaiting_replicates);
  s->set_noise_rank_change(e.noise_rank_change);
  const absl::Time now = clock_();
  const absl::Time since = now - absl::Hours(1);
  s->set_as_of_unix_ms(UnixMillis(now));
  absl::flat_hash_map<std::string, int64_t> reports_by_worker;
  for (const auto& [at, worker] : recent_reports_) {
    if (at <= since) continue;
    s->set_reports_last_hour(s->reports_last_hour() + 1);
    ++reports_by_worker[worker];
  }
  std::vector<std::pair<absl::Time, const std::string*>> seen;
  for (const auto& [worker, at] : last_seen_) {
    if (at > since) seen.emplace_back(at, &worker);
  }
  std::sort(seen.begin(), seen.end(), [](const auto& a, const auto& b) {
    return a.first != b.first ? a.first > b.first : *a.second < *b.second;
  });
  for (const auto& [at, worker] : seen) {
    v1::WorkerActivity* w = s->add_workers();
    w->set_worker(*worker);
    w->set_last_seen_unix_ms(UnixMillis(at));
    auto it = reports_by_worker.find(*worker);
    w->set_reports_last_hour(it == reports_by_worker.end() ? 0 : it->second);
  }
  if (const campaign::Trial* best = campaign_.best()) *s->mutable_best() = TrialView(*best);
  const search::DistributionSummary summary = campaign_.distribution().Summary();
  if (summary.gaussian) {
    s->set_step_size(summary.gaussian->sigma);
    s->set_axis_ratio(summary.gaussian->axis_ratio);
  }
  for (v1::Marginal& m : codec::MarginalsToProto(summary, campaign_.space(), design_)) {
    *s->add_marginals() = std::move(m);
  }
  return view;
}

std::vector<v1::Trial> CampaignHost::Trials(std::optional<campaign::TrialState> state, int64_t after, int limit,
                                         int64_t* next_after) const {
  absl::ReaderMutexLock lock(&mu_);
  std::vector<v1::Trial> out;
  *next_after = 0;
  for (int64_t n = std::max<int64_t>(after + 1, 1); n <= campaign_.trial_count(); ++n) {
    const campaign::Trial& t = *campaign_.trial(n);
    if (state.has_value() && t.state != *state) continue;
    if (static_cast<int>(out.size()) == limit) {
      *next_after = out.back().number();
      break;
    }
    out.push_back(TrialView(t));
  }
  return out;
}

absl::StatusOr<std::vector<v1::GenerationView>> CampaignHost::Generations(int64_t after, int limit,
                                                                      int64_t* next_after) const {
  *next_after = 0;
  // The store's committed history: no lock needed (space_ and design_ never change).
  absl::StatusOr<std::vector<v1::GenerationSummary>> stored = store_->ListGenerationsAfter(id_, after, limit + 1);
  if (!stored.ok()) return stored.status();
  std::vector<v1::GenerationView> out;
  for (const v1::GenerationSummary& g : *stored) {
    if (static_cast<int>(out.size()) == limit) {
      *next_after = out.back().generation();
      break;
    }
    absl::StatusOr<v1::GenerationView> view = codec::GenerationViewFromSummary(g, space_, design_);
    if (!view.ok()) {
      return absl::DataLossError(absl::StrCat("campaign '", name(), "': ", view.status().message()));
    }
    out.push_back(*std::move(view));
  }
  return out;
}

int64_t CampaignHost::WaitForChange(int64_t version, absl::Time deadline) const {
  absl::MutexLock lock(&mu_);
  auto changed = [this, version]() ABSL_SHARED_LOCKS_REQUIRED(mu_) { return version_ != version; };
  mu_.AwaitWithDeadline(absl::Condition(&changed), deadline);
  return version_;
}

CampaignGauges CampaignHost::Gauges() const {
  absl::ReaderMutexLock lock(&mu_);
  return {campaign_.counts(), campaign_.engine().phase, campaign_.engine().generation};
}

}  // namespace ogive::service
