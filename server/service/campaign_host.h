// CampaignHost: one campaign served by ogived — the engine (campaign::Campaign), its design, and the path of every
// request through it: plan, apply, queue the write, reply once it committed.
//
// A reply is sent only after the transaction holding its change committed. To let many requests of one
// campaign share an fsync, the host applies a change to memory under its mutex and queues the write in
// order, then waits for the commit outside the mutex; the next request plans on top. Ask and Tell do
// not wait on the caller's thread: their reply is a continuation that the CommitWaiter runs once the
// write committed. The writes of one
// host form a chain in the store: if one fails, every later one fails too, nothing of them is stored,
// and the host reloads the campaign from the store (what is on disk) before it serves again. So a failed
// commit never leaves memory ahead of disk for long, and never acknowledges anything not on disk.
// Operations on one campaign are serialized by the host's mutex; different campaigns never wait for each
// other (beyond sharing the store's group commit).
//
// Thread-safe. Owned by the Registry; handlers hold it by shared_ptr.
#ifndef OGIVE_SERVER_SERVICE_CAMPAIGN_HOST_H_
#define OGIVE_SERVER_SERVICE_CAMPAIGN_HOST_H_

#include <cstdint>
#include <deque>
#include <functional>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "absl/container/btree_map.h"
#include "absl/container/flat_hash_map.h"
#include "absl/functional/any_invocable.h"
#include "absl/status/statusor.h"
#include "absl/synchronization/mutex.h"
#include "absl/time/time.h"
#include "ogive/v1/service.pb.h"
#include "ogive/v1/campaign.pb.h"
#include "server/service/change_tally.h"
#include "server/service/commit_waiter.h"
#include "server/campaign/campaign.h"
#include "storage/store.h"

namespace ogive::service {

// Receives the outcome of a request once it is known: called exactly once, on the caller's thread for
// an error found before anything was queued, on the CommitWaiter's thread otherwise.
template <typename Response>
using Reply = absl::AnyInvocable<void(absl::StatusOr<Response>)>;

// The trial numbers each ask request id was answered with. Ordered, not hashed: it grows by one entry
// per ask for the life of the campaign, and a hash table's growth would rehash every entry while the
// host holds the campaign's lock (a stall of every request of the campaign, milliseconds at some ten
// thousand asks).
using AskRequestIndex = absl::btree_map<std::string, std::vector<int64_t>>;

class ServiceMetrics;

// A campaign's counts for metrics, read cheaply (no distribution summary).
struct CampaignGauges {
  campaign::TrialCounts counts;
  campaign::Phase phase = campaign::Phase::kOpen;
  int64_t generation = 0;
};

class CampaignHost {
 public:
  // A host for a campaign that was just created or loaded. `store`, `waiter` and `metrics` (may be null:
  // nothing is counted) outlive the host. `clock` dates the activity shown in views
  // (StatusSummary.workers, reports_last_hour).
  CampaignHost(int64_t id, v1::CampaignDesign design, campaign::Campaign campaign, storage::Store* store, CommitWaiter* waiter,
            std::string create_request_id,
            AskRequestIndex ask_requests, ServiceMetrics* metrics = nullptr,
            std::function<absl::Time()> clock = [] { return absl::Now(); });

  const std::string& name() const { return design_.name(); }
  const v1::CampaignDesign& design() const { return design_; }  // immutable
  int64_t id() const { return id_; }
  const std::string& create_request_id() const { return create_request_id_; }

  // The write methods take the label of the caller's token (empty without tokens) and store it with
  // the events they write; a phase change they cause records it too.

  // Ask: `count` trials for `worker`. A request id seen before returns the trials it returned then.
  void Ask(int count, const std::string& worker, std::optional<absl::Duration> lease, const std::string& request_id,
           absl::Time now, const std::string& token_label, Reply<v1::AskResponse> reply);
  // Each report's reported_by is stored with its trial.
  void Tell(const std::vector<campaign::Report>& reports, const std::string& worker, absl::Time now,
            const std::string& token_label, Reply<v1::TellResponse> reply);
  absl::StatusOr<v1::RenewResponse> Renew(const std::vector<int64_t>& trials, const std::string& worker,
                                          std::optional<absl::Duration> lease, absl::Time now);
  absl::StatusOr<v1::CampaignView> SetPhase(campaign::PhaseCommand command, absl::Time now,
                                         const std::string& token_label = "");
  // Lapses expired leases; returns how many lapsed.
  absl::StatusOr<int> Sweep(absl::Time now);

  // The campaign's view; with the design unless `brief`. Sets *version (when given) to the version the
  // view shows, read under the same lock.
  v1::CampaignView View(bool brief, int64_t* version = nullptr) const;
  // Trials with number > after, optionally of one state, at most limit; sets *next_after to the last
  // number returned when more remain (0 otherwise).
  std::vector<v1::Trial> Trials(std::optional<campaign::TrialState> state, int64_t after, int limit,
                                int64_t* next_after) const;

  // Views of the stored generation summaries with generation > after, at most limit, in generation
  // order (committed updates only); sets *next_after to the last generation returned when more remain
  // (0 otherwise). UNAVAILABLE when the store is busy; DATA_LOSS when a stored summary does not fit
  // the campaign's parameters.
  absl::StatusOr<std::vector<v1::GenerationView>> Generations(int64_t after, int limit, int64_t* next_after) const;

  // Blocks until the campaign changed after `version` (returns the new version) or `deadline` passed
  // (returns `version`).
  int64_t WaitForChange(int64_t version, absl::Time deadline) const;
  CampaignGauges Gauges() const;

 private:
  // A queued write of this host and the chain it belongs to.
  struct Queued {
    std::unique_ptr<storage::PendingCommit> pending;
    int64_t chain = 0;
    ChangeTally tally;  // what the change did, counted once it committed
  };
  // Applies `change` to memory and queues its write (with the extra log lines, every one of them
  // carrying `token_label`). Caller holds mu_.
  Queued ApplyAndQueue(campaign::Change change, std::vector<storage::Event> events,
                       std::optional<std::pair<std::string, std::vector<int64_t>>> ask_request, absl::Time now,
                       const std::string& token_label) ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  // Waits for a queued write outside mu_; after a failure reloads the campaign from the store.
  absl::Status Await(Queued queued) ABSL_LOCKS_EXCLUDED(mu_);
  // Await's second half: what to report once the write of `chain` ended with `committed`; counts
  // `tally` if it committed.
  absl::Status AfterCommit(int64_t chain, const ChangeTally& tally, absl::Status committed) ABSL_LOCKS_EXCLUDED(mu_);
  // Replies `response` (or the failure) once `queued` committed, from the waiter's thread.
  template <typename Response>
  void ReplyAfterCommit(Queued queued, Response response, Reply<Response> reply) ABSL_LOCKS_EXCLUDED(mu_);
  // UNAVAILABLE while the campaign could not be reloaded after a failed commit.
  absl::Status Usable() const ABSL_SHARED_LOCKS_REQUIRED(mu_);
  v1::Trial TrialView(const campaign::Trial& t) const ABSL_SHARED_LOCKS_REQUIRED(mu_);
  v1::CampaignView ViewLocked(bool brief) const ABSL_SHARED_LOCKS_REQUIRED(mu_);
  // Records that `worker` asked, reported (`reports` stored) or renewed at `now`.
  void NoteActivity(const std::string& worker, absl::Time now, int reports) ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);

  const int64_t id_;
  const v1::CampaignDesign design_;
  const std::string create_request_id_;
  storage::Store* const store_;
  CommitWaiter* const waiter_;
  ServiceMetrics* const metrics_;
  const search::Space space_;  // the campaign's space, never changed (readable without mu_)

  mutable absl::Mutex mu_;
  campaign::Campaign campaign_ ABSL_GUARDED_BY(mu_);
  AskRequestIndex ask_requests_ ABSL_GUARDED_BY(mu_);
  int64_t version_ ABSL_GUARDED_BY(mu_) = 0;
  const std::function<absl::Time()> clock_;
  // Reports of the last hour or so (time, worker), oldest first, and when each worker was last seen.
  std::deque<std::pair<absl::Time, std::string>> recent_reports_ ABSL_GUARDED_BY(mu_);
  absl::flat_hash_map<std::string, absl::Time> last_seen_ ABSL_GUARDED_BY(mu_);
  absl::Time next_forget_ ABSL_GUARDED_BY(mu_) = absl::InfinitePast();  // of last_seen_'s stale workers
  int64_t chain_ ABSL_GUARDED_BY(mu_) = 1;          // the store chain of this host's writes
  absl::Status broken_ ABSL_GUARDED_BY(mu_);        // set when a reload failed
};

}  // namespace ogive::service

#endif  // OGIVE_SERVER_SERVICE_CAMPAIGN_HOST_H_
