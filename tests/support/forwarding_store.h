// ForwardingStore: a storage::Store that passes every call to a real store, for tests that fake one
// part of the environment (a failing commit, a slow creation) and keep the rest real. A test derives
// from it and overrides what it fakes; Store's own defaults (LoadCampaign, the token calls, ...) go
// through these forwarded calls.
//
// Does not own the real store, which must outlive it. Thread-safe as the real store is.
#ifndef OGIVE_TESTS_SUPPORT_FORWARDING_STORE_H_
#define OGIVE_TESTS_SUPPORT_FORWARDING_STORE_H_

#include <cstdint>
#include <memory>
#include <optional>
#include <string>
#include <utility>
#include <vector>

#include "storage/store.h"

namespace ogive::testing {

class ForwardingStore : public storage::Store {
 public:
  explicit ForwardingStore(storage::Store* real) : real_(real) {}

  absl::StatusOr<std::vector<storage::StoredCampaign>> LoadAll() override { return real_->LoadAll(); }
  absl::StatusOr<int64_t> CreateCampaign(const std::string& name, const v1::CampaignDesign& design,
                                      const v1::EngineState& engine, const std::string& request_id) override {
    return real_->CreateCampaign(name, design, engine, request_id);
  }
  std::unique_ptr<storage::PendingCommit> CommitAsync(storage::CampaignWrite write) override {
    return real_->CommitAsync(std::move(write));
  }
  absl::StatusOr<storage::TrialPage> ListTrials(int64_t campaign_id, std::optional<v1::TrialState> state,
                                                int64_t after_number, int limit) override {
    return real_->ListTrials(campaign_id, state, after_number, limit);
  }
  absl::StatusOr<std::vector<v1::GenerationSummary>> ListGenerations(int64_t campaign_id) override {
    return real_->ListGenerations(campaign_id);
  }
  absl::StatusOr<std::vector<storage::Event>> ListEvents(int64_t campaign_id, int limit) override {
    return real_->ListEvents(campaign_id, limit);
  }
  absl::StatusOr<int64_t> SizeBytes() override { return real_->SizeBytes(); }

 protected:
  storage::Store* real() const { return real_; }

 private:
  storage::Store* const real_;
};

}  // namespace ogive::testing

#endif  // OGIVE_TESTS_SUPPORT_FORWARDING_STORE_H_
