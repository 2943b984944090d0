#include "server/service/registry.h"

#include <utility>

#include "absl/strings/str_cat.h"
#include "server/codec/design_codec.h"
#include "server/codec/study_codec.h"
#include "server/service/validation.h"

namespace ogive::service {
namespace {

struct Built {
  search::Space space;
  search::OutcomeOrder order;
  search::DistributionOptions distribution_options;
  study::StudyOptions study_options;
};

absl::StatusOr<Built> Build(const v1::StudyDesign& design) {
  absl::StatusOr<search::Space> space = codec::SpaceFromDesign(design);
  if (!space.ok()) return space.status();
  absl::StatusOr<search::OutcomeOrder> order = codec::OrderFromObjective(design.objective());
  if (!order.ok()) return order.status();
  absl::StatusOr<search::DistributionOptions> d = codec::DistributionOptionsFromDesign(design, *space);
  if (!d.ok()) return d.status();
  absl::StatusOr<study::StudyOptions> o = codec::StudyOptionsFromDesign(design);
  if (!o.ok()) return o.status();
  return Built{*std::move(space), *order, *std::move(d), *std::move(o)};
}

}  // namespace

absl::Status Registry::LoadAll() {
  absl::StatusOr<std::vector<storage::StoredStudy>> stored = store_->LoadAll();
  if (!stored.ok()) return stored.status();
  absl::MutexLock lock(&mu_);
  for (storage::StoredStudy& s : *stored) {
    absl::StatusOr<Built> built = Build(s.design);
    if (!built.ok()) {
      return absl::DataLossError(absl::StrCat("study '", s.name, "': stored design is invalid: ", built.status().message()));
    }
    absl::StatusOr<study::StudySnapshot> snapshot = codec::SnapshotFromProto(s.snapshot, built->space);
    if (!snapshot.ok()) {
      return absl::DataLossError(absl::StrCat("study '", s.name, "': ", snapshot.status().message()));
    }
    absl::StatusOr<study::Study> restored =
        study::Study::Restore(built->space, built->order, built->distribution_options, built->study_options,
                              *std::move(snapshot));
    if (!restored.ok()) return absl::DataLossError(absl::StrCat("study '", s.name, "': ", restored.status().message()));
    AskRequestIndex asks(s.ask_requests.begin(), s.ask_requests.end());
    studies_[s.name] = std::make_shared<StudyHost>(s.id, s.design, *std::move(restored), store_, &waiter_,
                                                   s.create_request_id, std::move(asks), metrics_);
  }
  return absl::OkStatus();
}

absl::StatusOr<std::shared_ptr<StudyHost>> Registry::Create(const v1::StudyDesign& design,
                                                            const std::string& request_id) {
  if (absl::Status s = ValidateDesignShape(design, limits_); !s.ok()) return s;
  absl::StatusOr<Built> built = Build(design);
  if (!built.ok()) return built.status();
  absl::StatusOr<study::Study> created =
      study::Study::Create(built->space, built->order, built->distribution_options, built->study_options);
  if (!created.ok()) return created.status();
  // Creations are decided one at a time (once LoadAll is done only they add to studies_), so the
  // check below still holds when the study is added after its commit; mu_ is held only to read and
  // to add, so lookups never wait for a creation's fsync.
  absl::MutexLock creating(&create_mu_);
  {
    absl::ReaderMutexLock lock(&mu_);
    if (auto it = studies_.find(design.name()); it != studies_.end()) {
      if (!request_id.empty() && it->second->create_request_id() == request_id) return it->second;
      return absl::AlreadyExistsError(absl::StrCat("design.name: a study named '", design.name(), "' already exists"));
    }
    if (static_cast<int>(studies_.size()) >= limits_.max_studies) {
      return absl::ResourceExhaustedError(
          absl::StrCat("this server holds its limit of ", limits_.max_studies, " studies"));
    }
  }
  absl::StatusOr<int64_t> id = store_->CreateStudy(design.name(), design,
                                                   codec::EngineStateToProto(created->engine()), request_id);
  if (!id.ok()) return id.status();
  auto host = std::make_shared<StudyHost>(*id, design, *std::move(created), store_, &waiter_, request_id,
                                          AskRequestIndex{}, metrics_);
  absl::MutexLock lock(&mu_);
  studies_[design.name()] = host;
  return host;
}

absl::StatusOr<std::shared_ptr<StudyHost>> Registry::Find(const std::string& name) const {
  absl::ReaderMutexLock lock(&mu_);
  auto it = studies_.find(name);
  if (it == studies_.end()) return absl::NotFoundError(absl::StrCat("study: no study named '", name, "'"));
  return it->second;
}

std::vector<std::shared_ptr<StudyHost>> Registry::All() const {
  absl::ReaderMutexLock lock(&mu_);
  std::vector<std::shared_ptr<StudyHost>> all;
  for (const auto& [name, host] : studies_) all.push_back(host);
  return all;
}

}  // namespace ogive::service
