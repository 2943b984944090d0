#include "server/service/registry.h"

#include <utility>

#include "absl/strings/str_cat.h"
#include "server/base/reason.h"
#include "server/codec/design_codec.h"
#include "server/codec/campaign_codec.h"
#include "server/service/validation.h"

namespace ogive::service {
namespace {

struct Built {
  search::Space space;
  search::OutcomeOrder order;
  search::DistributionOptions distribution_options;
  campaign::CampaignOptions campaign_options;
};

absl::StatusOr<Built> Build(const v1::CampaignDesign& design) {
  absl::StatusOr<search::Space> space = codec::SpaceFromDesign(design);
  if (!space.ok()) return space.status();
  absl::StatusOr<search::OutcomeOrder> order = codec::OrderFromObjective(design.objective());
  if (!order.ok()) return order.status();
  absl::StatusOr<search::DistributionOptions> d = codec::DistributionOptionsFromDesign(design, *space);
  if (!d.ok()) return d.status();
  absl::StatusOr<campaign::CampaignOptions> o = codec::CampaignOptionsFromDesign(design);
  if (!o.ok()) return o.status();
  return Built{*std::move(space), *order, *std::move(d), *std::move(o)};
}

}  // namespace

absl::Status Registry::LoadAll() {
  absl::StatusOr<std::vector<storage::StoredCampaign>> stored = store_->LoadAll();
  if (!stored.ok()) return stored.status();
  absl::MutexLock lock(&mu_);
  for (storage::StoredCampaign& s : *stored) {
    absl::StatusOr<Built> built = Build(s.design);
    if (!built.ok()) {
      return absl::DataLossError(absl::StrCat("campaign '", s.name, "': stored design is invalid: ", built.status().message()));
    }
    absl::StatusOr<campaign::CampaignSnapshot> snapshot = codec::SnapshotFromProto(s.snapshot, built->space);
    if (!snapshot.ok()) {
      return absl::DataLossError(absl::StrCat("campaign '", s.name, "': ", snapshot.status().message()));
    }
    absl::StatusOr<campaign::Campaign> restored =
        campaign::Campaign::Restore(built->space, built->order, built->distribution_options, built->campaign_options,
                              *std::move(snapshot));
    if (!restored.ok()) return absl::DataLossError(absl::StrCat("campaign '", s.name, "': ", restored.status().message()));
    AskRequestIndex asks(s.ask_requests.begin(), s.ask_requests.end());
    campaigns_[s.name] = std::make_shared<CampaignHost>(s.id, s.design, *std::move(restored), store_, &waiter_,
                                                   s.create_request_id, std::move(asks), metrics_);
  }
  return absl::OkStatus();
}

absl::StatusOr<std::shared_ptr<CampaignHost>> Registry::Create(const v1::CampaignDesign& design,
                                                            const std::string& request_id) {
  if (absl::Status s = ValidateDesignShape(design, limits_); !s.ok()) return s;
  absl::StatusOr<Built> built = Build(design);
  if (!built.ok()) return built.status();
  absl::StatusOr<campaign::Campaign> created =
      campaign::Campaign::Create(built->space, built->order, built->distribution_options, built->campaign_options);
  if (!created.ok()) return created.status();
  // Creations are decided one at a time (once LoadAll is done only they add to campaigns_), so the
  // check below still holds when the campaign is added after its commit; mu_ is held only to read and
  // to add, so lookups never wait for a creation's fsync.
  absl::MutexLock creating(&create_mu_);
  {
    absl::ReaderMutexLock lock(&mu_);
    if (auto it = campaigns_.find(design.name()); it != campaigns_.end()) {
      if (!request_id.empty() && it->second->create_request_id() == request_id) return it->second;
      return WithReason(
          absl::AlreadyExistsError(absl::StrCat("design.name: a campaign named '", design.name(), "' already exists")),
          {std::string(reason::kCampaignExists), {{"campaign", design.name()}}, std::nullopt});
    }
    if (static_cast<int>(campaigns_.size()) >= limits_.max_campaigns) {
      return WithReason(absl::ResourceExhaustedError(absl::StrCat("this server holds its limit of ",
                                                                  limits_.max_campaigns, " campaigns")),
                        {std::string(reason::kLimitExceeded), {{"limit", "max_campaigns"}}, std::nullopt});
    }
  }
  absl::StatusOr<int64_t> id = store_->CreateCampaign(design.name(), design,
                                                   codec::EngineStateToProto(created->engine()), request_id);
  if (!id.ok()) return id.status();
  auto host = std::make_shared<CampaignHost>(*id, design, *std::move(created), store_, &waiter_, request_id,
                                          AskRequestIndex{}, metrics_);
  absl::MutexLock lock(&mu_);
  campaigns_[design.name()] = host;
  return host;
}

absl::StatusOr<std::shared_ptr<CampaignHost>> Registry::Find(const std::string& name) const {
  absl::ReaderMutexLock lock(&mu_);
  auto it = campaigns_.find(name);
  if (it == campaigns_.end()) {
    return WithReason(absl::NotFoundError(absl::StrCat("campaign: no campaign named '", name, "'")),
                      {std::string(reason::kCampaignNotFound), {{"campaign", name}}, std::nullopt});
  }
  return it->second;
}

std::vector<std::shared_ptr<CampaignHost>> Registry::All() const {
  absl::ReaderMutexLock lock(&mu_);
  std::vector<std::shared_ptr<CampaignHost>> all;
  for (const auto& [name, host] : campaigns_) all.push_back(host);
  return all;
}

}  // namespace ogive::service
