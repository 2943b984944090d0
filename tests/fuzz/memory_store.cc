#include "tests/fuzz/memory_store.h"

#include <cmath>

#include "absl/strings/str_cat.h"
#include "tests/fuzz/require.h"

namespace ogive::fuzz {
namespace {

// A committed write is already done; Wait() only reports how it went.
class Done final : public storage::PendingCommit {
 public:
  explicit Done(absl::Status status) : status_(std::move(status)) {}
  absl::Status Wait() override { return status_; }

 private:
  absl::Status status_;
};

// Messages go through their wire form on the way in and out, as they do in the SQLite file, so that
// whatever would not survive that (a string that is not UTF-8, say) fails here as it would there.
template <typename Message>
absl::Status RoundTrip(const Message& in, Message& out, const std::string& what) {
  std::string bytes;
  if (!in.SerializeToString(&bytes)) return absl::InvalidArgumentError(absl::StrCat(what, " does not serialize"));
  if (!out.ParseFromString(bytes)) return absl::DataLossError(absl::StrCat(what, " does not parse back"));
  return absl::OkStatus();
}

}  // namespace

absl::StatusOr<std::vector<storage::StoredCampaign>> MemoryStore::LoadAll() {
  absl::ReaderMutexLock lock(&mu_);
  std::vector<storage::StoredCampaign> all;
  for (const auto& [id, data] : campaigns_) all.push_back(data.stored);
  return all;
}

const storage::StoredCampaign* MemoryStore::Peek(int64_t campaign_id) const {
  absl::ReaderMutexLock lock(&mu_);
  auto it = campaigns_.find(campaign_id);
  return it == campaigns_.end() ? nullptr : &it->second.stored;
}

const std::vector<v1::GenerationSummary>* MemoryStore::PeekGenerations(int64_t campaign_id) const {
  absl::ReaderMutexLock lock(&mu_);
  auto it = campaigns_.find(campaign_id);
  return it == campaigns_.end() ? nullptr : &it->second.generations;
}

absl::StatusOr<int64_t> MemoryStore::CreateCampaign(const std::string& name, const v1::CampaignDesign& design,
                                                 const v1::EngineState& engine, const std::string& request_id) {
  absl::MutexLock lock(&mu_);
  for (const auto& [id, data] : campaigns_) {
    if (data.stored.name == name) {
      ++failed_writes_;
      return absl::AlreadyExistsError(absl::StrCat("campaign '", name, "' already exists"));
    }
  }
  const int64_t id = campaigns_.empty() ? 1 : campaigns_.rbegin()->first + 1;
  CampaignData data;
  data.stored.id = id;
  data.stored.name = name;
  data.stored.create_request_id = request_id;
  absl::Status s = RoundTrip(design, data.stored.design, "design");
  if (s.ok()) s = RoundTrip(engine, *data.stored.snapshot.mutable_engine(), "engine state");
  if (!s.ok()) {
    ++failed_writes_;
    return s;
  }
  campaigns_.emplace(id, std::move(data));
  ++committed_writes_;
  return id;
}

std::unique_ptr<storage::PendingCommit> MemoryStore::CommitAsync(storage::CampaignWrite write) {
  absl::MutexLock lock(&mu_);
  const std::pair<int64_t, int64_t> chain{write.campaign_id, write.chain};
  absl::Status status;
  if (write.chain != 0 && broken_chains_.count(chain) > 0) {
    status = absl::UnavailableError(absl::StrCat("campaign id ", write.campaign_id,
                                                 ": an earlier write of this campaign failed; nothing of this write was stored"));
  } else {
    status = Apply(write);
    if (!status.ok() && write.chain != 0) broken_chains_.insert(chain);
  }
  if (status.ok()) {
    ++committed_writes_;
  } else {
    ++failed_writes_;
  }
  return std::make_unique<Done>(status);
}

// Checks the whole write first and changes nothing unless all of it is good, like the SAVEPOINT of
// the real store.
absl::Status MemoryStore::Apply(storage::CampaignWrite& write) {
  auto it = campaigns_.find(write.campaign_id);
  if (it == campaigns_.end()) return absl::NotFoundError(absl::StrCat("campaign id ", write.campaign_id, ": no such campaign"));
  CampaignData& data = it->second;
  const std::string where = absl::StrCat("campaign id ", write.campaign_id, ": ");
  std::vector<v1::TrialRecord> trials(write.trials.size());
  int64_t count = data.stored.snapshot.trials_size();
  for (size_t i = 0; i < write.trials.size(); ++i) {
    const v1::TrialRecord& record = write.trials[i];
    if (record.number() < 1 || record.number() > count + 1) {
      return absl::InvalidArgumentError(absl::StrCat(where, "trials[", i, "].number: must be in 1..", count + 1,
                                                     " (dense), got ", record.number()));
    }
    if (record.number() == count + 1) ++count;
    if (!std::isfinite(record.score())) {
      return absl::InvalidArgumentError(absl::StrCat(where, "trials[", i, "].score: must be finite, got ", record.score()));
    }
    if (absl::Status s = RoundTrip(record, trials[i], absl::StrCat(where, "trial ", record.number())); !s.ok()) return s;
  }
  std::optional<v1::EngineState> engine;
  if (write.engine.has_value()) {
    write.engine->clear_distribution();
    if (absl::Status s = RoundTrip(*write.engine, engine.emplace(), where + "engine"); !s.ok()) return s;
  }
  std::optional<v1::DistributionState> distribution;
  if (write.distribution.has_value()) {
    if (absl::Status s = RoundTrip(*write.distribution, distribution.emplace(), where + "distribution"); !s.ok()) {
      return s;
    }
  }
  for (const v1::GenerationSummary& g : write.generations) {
    for (const v1::GenerationSummary& old : data.generations) {
      if (old.generation() == g.generation()) {
        return absl::AlreadyExistsError(absl::StrCat(where, "generation ", g.generation(), " is already stored"));
      }
    }
  }
  if (write.ask_request.has_value()) {
    if (write.ask_request->first.empty()) return absl::InvalidArgumentError(where + "ask_request: empty request id");
    // The real store appends without looking; storing an id twice would be the service's bug.
    for (const auto& [id, numbers] : data.stored.ask_requests) {
      OGIVE_FUZZ_REQUIRE(id != write.ask_request->first, where, "ask request '", id,
                         "' stored a second time (a retry must be answered from memory)");
    }
  }

  google::protobuf::RepeatedPtrField<v1::TrialRecord>& stored_trials = *data.stored.snapshot.mutable_trials();
  for (v1::TrialRecord& record : trials) {
    const int index = static_cast<int>(record.number() - 1);
    if (index == stored_trials.size()) {
      *stored_trials.Add() = std::move(record);
    } else {
      stored_trials[index] = std::move(record);
    }
  }
  v1::EngineState* stored_engine = data.stored.snapshot.mutable_engine();
  if (engine.has_value()) {
    v1::DistributionState kept = stored_engine->distribution();
    *stored_engine = *std::move(engine);
    *stored_engine->mutable_distribution() = std::move(kept);
  }
  if (distribution.has_value()) *stored_engine->mutable_distribution() = *std::move(distribution);
  for (v1::GenerationSummary& g : write.generations) data.generations.push_back(std::move(g));
  if (write.ask_request.has_value()) data.stored.ask_requests.push_back(*std::move(write.ask_request));
  for (storage::Event& e : write.events) data.events.push_back(std::move(e));
  return absl::OkStatus();
}

absl::StatusOr<storage::TrialPage> MemoryStore::ListTrials(int64_t campaign_id, std::optional<v1::TrialState> state,
                                                           int64_t after_number, int limit) {
  absl::ReaderMutexLock lock(&mu_);
  auto it = campaigns_.find(campaign_id);
  if (it == campaigns_.end()) return absl::NotFoundError(absl::StrCat("campaign id ", campaign_id, ": no such campaign"));
  storage::TrialPage page;
  for (const v1::TrialRecord& t : it->second.stored.snapshot.trials()) {
    if (t.number() <= after_number || (state.has_value() && t.state() != *state)) continue;
    if (static_cast<int>(page.trials.size()) == limit) {
      page.next_after = page.trials.back().number();
      break;
    }
    page.trials.push_back(t);
  }
  return page;
}

absl::StatusOr<std::vector<v1::GenerationSummary>> MemoryStore::ListGenerations(int64_t campaign_id) {
  absl::ReaderMutexLock lock(&mu_);
  auto it = campaigns_.find(campaign_id);
  if (it == campaigns_.end()) return absl::NotFoundError(absl::StrCat("campaign id ", campaign_id, ": no such campaign"));
  return it->second.generations;
}

absl::StatusOr<std::vector<storage::Event>> MemoryStore::ListEvents(int64_t campaign_id, int limit) {
  absl::ReaderMutexLock lock(&mu_);
  auto it = campaigns_.find(campaign_id);
  if (it == campaigns_.end()) return absl::NotFoundError(absl::StrCat("campaign id ", campaign_id, ": no such campaign"));
  const std::vector<storage::Event>& events = it->second.events;
  const size_t first = events.size() > static_cast<size_t>(limit) ? events.size() - limit : 0;
  return std::vector<storage::Event>(events.begin() + first, events.end());
}

absl::StatusOr<int64_t> MemoryStore::SizeBytes() { return 0; }

int64_t MemoryStore::failed_writes() const {
  absl::ReaderMutexLock lock(&mu_);
  return failed_writes_;
}

int64_t MemoryStore::committed_writes() const {
  absl::ReaderMutexLock lock(&mu_);
  return committed_writes_;
}

}  // namespace ogive::fuzz
