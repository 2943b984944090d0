// Registry: the campaigns one ogived serves, by name. Creates campaigns (validating the whole design),
// loads every stored campaign at start, and hands out CampaignHosts to the handlers.
//
// Thread-safe; a lookup never waits for a creation's commit. Owns the hosts and the CommitWaiter their replies run on; the store outlives the
// registry.
#ifndef OGIVE_SERVER_SERVICE_REGISTRY_H_
#define OGIVE_SERVER_SERVICE_REGISTRY_H_

#include <memory>
#include <string>
#include <vector>

#include "absl/container/btree_map.h"
#include "absl/status/statusor.h"
#include "absl/synchronization/mutex.h"
#include "absl/time/time.h"
#include "ogive/v1/campaign.pb.h"
#include "server/service/limits.h"
#include "server/service/campaign_host.h"
#include "storage/store.h"

namespace ogive::service {

class ServiceMetrics;

class Registry {
 public:
  // `metrics` may be null (nothing is counted); it outlives the registry.
  Registry(storage::Store* store, ServiceLimits limits, ServiceMetrics* metrics = nullptr)
      : store_(store), limits_(limits), metrics_(metrics) {}

  // Restores every stored campaign exactly (same generation, same next candidate). DATA_LOSS names the
  // campaign that could not be restored.
  absl::Status LoadAll();

  // Validates and creates a campaign. ALREADY_EXISTS when the name is taken by another request;
  // the same request id returns the existing campaign. RESOURCE_EXHAUSTED beyond max_campaigns.
  absl::StatusOr<std::shared_ptr<CampaignHost>> Create(const v1::CampaignDesign& design, const std::string& request_id);

  // NOT_FOUND naming the campaign when there is none by that name.
  absl::StatusOr<std::shared_ptr<CampaignHost>> Find(const std::string& name) const;

  std::vector<std::shared_ptr<CampaignHost>> All() const;

  const ServiceLimits& limits() const { return limits_; }

 private:
  storage::Store* const store_;
  const ServiceLimits limits_;
  ServiceMetrics* const metrics_;
  absl::Mutex create_mu_ ABSL_ACQUIRED_BEFORE(mu_);  // held through a creation, its commit included
  mutable absl::Mutex mu_;
  absl::btree_map<std::string, std::shared_ptr<CampaignHost>> campaigns_ ABSL_GUARDED_BY(mu_);
  // Last, so it is destroyed first: its remaining continuations still reach the hosts.
  CommitWaiter waiter_;
};

}  // namespace ogive::service

#endif  // OGIVE_SERVER_SERVICE_REGISTRY_H_
