#include "server/service/registry.h"

#include <utility>

#include "absl/strings/str_cat.h"
#include "server/codec/design_codec.h"
#include "server/codec/study_codec.h"

namespace ogive::service {
namespace {

bool NameCharactersOk(const std::string& name, bool allow_dot) {
  for (char c : name) {
    const bool ok = (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') || (c >= '0' && c <= '9') || c == '_' ||
                    c == '-' || (allow_dot && c == '.');
    if (!ok) return false;
  }
  return !name.empty();
}

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

absl::Status ValidateDesignShape(const v1::StudyDesign& design, const ServiceLimits& limits) {
  const int max_name = limits.max_name_bytes;
  if (design.name().empty()) return absl::InvalidArgumentError("design.name: must not be empty");
  if (static_cast<int>(design.name().size()) > max_name) {
    return absl::InvalidArgumentError(absl::StrCat("design.name: at most ", max_name, " bytes"));
  }
  if (!NameCharactersOk(design.name(), true)) {
    return absl::InvalidArgumentError(absl::StrCat("design.name: '", design.name(),
                                                   "' may hold only letters, digits, '_', '-' and '.'"));
  }
  if (design.parameters_size() > limits.max_parameters) {
    return absl::ResourceExhaustedError(absl::StrCat("design.parameters: at most ", limits.max_parameters,
                                                     " parameters, got ", design.parameters_size()));
  }
  for (int i = 0; i < design.parameters_size(); ++i) {
    const v1::Parameter& p = design.parameters(i);
    const std::string field = absl::StrCat("design.parameters[", i, "]");
    if (!NameCharactersOk(p.name(), false) || static_cast<int>(p.name().size()) > max_name) {
      return absl::InvalidArgumentError(absl::StrCat(field, ".name: '", p.name(), "' must be 1..", max_name,
                                                     " letters, digits, '_' or '-'"));
    }
    if (static_cast<int>(p.unit().size()) > max_name || static_cast<int>(p.description().size()) > 8 * max_name) {
      return absl::InvalidArgumentError(absl::StrCat(field, ": unit or description too long"));
    }
    if (p.has_categorical()) {
      if (p.categorical().options_size() > limits.max_options) {
        return absl::ResourceExhaustedError(
            absl::StrCat(field, ".categorical.options: at most ", limits.max_options, " options"));
      }
      for (const std::string& option : p.categorical().options()) {
        if (static_cast<int>(option.size()) > max_name) {
          return absl::InvalidArgumentError(absl::StrCat(field, ".categorical.options: at most ", max_name, " bytes each"));
        }
      }
    }
  }
  if (design.objective().has_grade_scale()) {
    if (design.objective().grade_scale().labels_size() > limits.max_options) {
      return absl::ResourceExhaustedError(
          absl::StrCat("design.objective.grade_scale.labels: at most ", limits.max_options, " labels"));
    }
    for (const std::string& label : design.objective().grade_scale().labels()) {
      if (static_cast<int>(label.size()) > max_name) {
        return absl::InvalidArgumentError(
            absl::StrCat("design.objective.grade_scale.labels: at most ", max_name, " bytes each"));
      }
    }
  }
  if (design.lease_seconds() > limits.max_lease_seconds) {
    return absl::InvalidArgumentError(
        absl::StrCat("design.lease_seconds: at most ", limits.max_lease_seconds, ", got ", design.lease_seconds()));
  }
  if (design.expected_workers() > 100000 || design.population_size() > 100000) {
    return absl::InvalidArgumentError("design.expected_workers, design.population_size: at most 100000");
  }
  return absl::OkStatus();
}

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
    absl::flat_hash_map<std::string, std::vector<int64_t>> asks(s.ask_requests.begin(), s.ask_requests.end());
    studies_[s.name] = std::make_shared<StudyHost>(s.id, s.design, *std::move(restored), store_, &waiter_,
                                                   s.create_request_id,
                                                   std::move(asks));
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
  absl::MutexLock lock(&mu_);
  if (auto it = studies_.find(design.name()); it != studies_.end()) {
    if (!request_id.empty() && it->second->create_request_id() == request_id) return it->second;
    return absl::AlreadyExistsError(absl::StrCat("design.name: a study named '", design.name(), "' already exists"));
  }
  if (static_cast<int>(studies_.size()) >= limits_.max_studies) {
    return absl::ResourceExhaustedError(absl::StrCat("this server holds its limit of ", limits_.max_studies, " studies"));
  }
  absl::StatusOr<int64_t> id = store_->CreateStudy(design.name(), design,
                                                   codec::EngineStateToProto(created->engine()), request_id);
  if (!id.ok()) return id.status();
  auto host = std::make_shared<StudyHost>(*id, design, *std::move(created), store_, &waiter_, request_id,
                                          absl::flat_hash_map<std::string, std::vector<int64_t>>{});
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
