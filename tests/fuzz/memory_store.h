// MemoryStore: a Store that keeps everything in memory, for the fuzz targets and the tests built on
// them. It stands in for the SQLite file (STYLE: fake the environment, not the logic): it keeps what
// was committed exactly as the real store would hand it back at start-up, refuses what the real store
// refuses (a non-finite score, an empty ask request id, an unknown campaign), aborts where the service
// broke a rule the real store leaves to it (an ask request id stored twice), and follows
// the same chain rule (once a write of a chain failed, every later write of that chain fails with
// UNAVAILABLE). It is stricter in one way: trial numbers must be dense (a write may replace trial k
// or add trial count + 1), as the campaign engine numbers them. Commits complete at once; there is no
// disk and no fsync.
//
// Thread-safe (one mutex); the fuzz targets drive it from one thread.
#ifndef OGIVE_TESTS_FUZZ_MEMORY_STORE_H_
#define OGIVE_TESTS_FUZZ_MEMORY_STORE_H_

#include <cstdint>
#include <map>
#include <memory>
#include <optional>
#include <set>
#include <string>
#include <utility>
#include <vector>

#include "absl/base/thread_annotations.h"
#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "absl/synchronization/mutex.h"
#include "storage/store.h"

namespace ogive::fuzz {

class MemoryStore final : public storage::Store {
 public:
  absl::StatusOr<std::vector<storage::StoredCampaign>> LoadAll() override;
  absl::StatusOr<int64_t> CreateCampaign(const std::string& name, const v1::CampaignDesign& design,
                                      const v1::EngineState& engine, const std::string& request_id) override;
  std::unique_ptr<storage::PendingCommit> CommitAsync(storage::CampaignWrite write) override;
  absl::StatusOr<storage::TrialPage> ListTrials(int64_t campaign_id, std::optional<v1::TrialState> state,
                                                int64_t after_number, int limit) override;
  absl::StatusOr<std::vector<v1::GenerationSummary>> ListGenerations(int64_t campaign_id) override;
  absl::StatusOr<std::vector<storage::Event>> ListEvents(int64_t campaign_id, int limit) override;
  absl::StatusOr<int64_t> SizeBytes() override;

  // Writes refused so far (of any kind). A fuzz target expects none: whatever the service lets
  // through must be storable.
  int64_t failed_writes() const;
  // Writes stored so far (CreateCampaign and Commit).
  int64_t committed_writes() const;

  // Read access without copies, for a single-threaded caller: what the store holds for a campaign (as
  // LoadAll would return it) and its generation summaries, valid and unchanged until the next write.
  // nullptr for an unknown id.
  const storage::StoredCampaign* Peek(int64_t campaign_id) const;
  const std::vector<v1::GenerationSummary>* PeekGenerations(int64_t campaign_id) const;

 private:
  struct CampaignData {
    storage::StoredCampaign stored;  // snapshot.trials(k) is trial k + 1
    std::vector<v1::GenerationSummary> generations;
    std::vector<storage::Event> events;
  };
  absl::Status Apply(storage::CampaignWrite& write) ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);

  mutable absl::Mutex mu_;
  std::map<int64_t, CampaignData> campaigns_ ABSL_GUARDED_BY(mu_);  // by id
  std::set<std::pair<int64_t, int64_t>> broken_chains_ ABSL_GUARDED_BY(mu_);
  int64_t failed_writes_ ABSL_GUARDED_BY(mu_) = 0;
  int64_t committed_writes_ ABSL_GUARDED_BY(mu_) = 0;
};

}  // namespace ogive::fuzz

#endif  // OGIVE_TESTS_FUZZ_MEMORY_STORE_H_
