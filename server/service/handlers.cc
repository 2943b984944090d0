#include "server/service/handlers.h"

#include <algorithm>
#include <cmath>
#include <optional>
#include <string>
#include <vector>

#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "server/codec/design_codec.h"
#include "server/codec/study_codec.h"

namespace ogive::service {
namespace {

absl::Status CheckName(const std::string& value, const char* field, const ServiceLimits& limits) {
  if (value.empty()) return absl::InvalidArgumentError(absl::StrCat(field, ": must not be empty"));
  if (static_cast<int>(value.size()) > limits.max_name_bytes) {
    return absl::InvalidArgumentError(absl::StrCat(field, ": at most ", limits.max_name_bytes, " bytes"));
  }
  return absl::OkStatus();
}

absl::Status CheckOptionalName(const std::string& value, const char* field, const ServiceLimits& limits) {
  return value.empty() ? absl::OkStatus() : CheckName(value, field, limits);
}

absl::StatusOr<std::optional<absl::Duration>> LeaseOf(double seconds, const ServiceLimits& limits) {
  if (!std::isfinite(seconds) || seconds < 0 || seconds > limits.max_lease_seconds) {
    return absl::InvalidArgumentError(absl::StrCat("lease_seconds: must be 0 (the study's default) or in (0, ",
                                                   limits.max_lease_seconds, "], got ", seconds));
  }
  if (seconds == 0) return std::optional<absl::Duration>();
  return std::optional<absl::Duration>(absl::Seconds(seconds));
}

absl::StatusOr<std::shared_ptr<StudyHost>> FindStudy(Registry& registry, const std::string& name) {
  if (absl::Status s = CheckName(name, "study", registry.limits()); !s.ok()) return s;
  return registry.Find(name);
}

}  // namespace

absl::StatusOr<v1::StudyView> CreateStudy(Registry& registry, const v1::CreateStudyRequest& request) {
  if (absl::Status s = CheckOptionalName(request.request_id(), "request_id", registry.limits()); !s.ok()) return s;
  absl::StatusOr<std::shared_ptr<StudyHost>> host = registry.Create(request.design(), request.request_id());
  if (!host.ok()) return host.status();
  return (*host)->View(false);
}

absl::StatusOr<v1::StudyView> GetStudy(Registry& registry, const v1::GetStudyRequest& request) {
  absl::StatusOr<std::shared_ptr<StudyHost>> host = FindStudy(registry, request.study());
  if (!host.ok()) return host.status();
  return (*host)->View(false);
}

absl::StatusOr<v1::ListStudiesResponse> ListStudies(Registry& registry, const v1::ListStudiesRequest&,
                                                    const std::vector<std::string>& scope) {
  v1::ListStudiesResponse response;
  for (const auto& host : registry.All()) {
    if (!scope.empty() && std::find(scope.begin(), scope.end(), host->name()) == scope.end()) continue;
    *response.add_studies() = host->View(true);
  }
  return response;
}

absl::StatusOr<v1::AskResponse> Ask(Registry& registry, const v1::AskRequest& request, absl::Time now,
                                    const std::string& token_label) {
  const ServiceLimits& limits = registry.limits();
  if (request.count() < 1 || request.count() > limits.max_ask_count) {
    return absl::InvalidArgumentError(
        absl::StrCat("count: must be in 1..", limits.max_ask_count, ", got ", request.count()));
  }
  if (absl::Status s = CheckOptionalName(request.worker(), "worker", limits); !s.ok()) return s;
  if (absl::Status s = CheckOptionalName(request.request_id(), "request_id", limits); !s.ok()) return s;
  absl::StatusOr<std::optional<absl::Duration>> lease = LeaseOf(request.lease_seconds(), limits);
  if (!lease.ok()) return lease.status();
  absl::StatusOr<std::shared_ptr<StudyHost>> host = FindStudy(registry, request.study());
  if (!host.ok()) return host.status();
  return (*host)->Ask(request.count(), request.worker(), *lease, request.request_id(), now, token_label);
}

absl::StatusOr<v1::TellResponse> Tell(Registry& registry, const v1::TellRequest& request, absl::Time now,
                                      const std::string& token_label) {
  const ServiceLimits& limits = registry.limits();
  if (request.reports_size() < 1 || request.reports_size() > limits.max_reports_per_tell) {
    return absl::InvalidArgumentError(absl::StrCat("reports: must hold 1..", limits.max_reports_per_tell,
                                                   " reports, got ", request.reports_size()));
  }
  if (absl::Status s = CheckOptionalName(request.worker(), "worker", limits); !s.ok()) return s;
  absl::StatusOr<std::shared_ptr<StudyHost>> host = FindStudy(registry, request.study());
  if (!host.ok()) return host.status();
  const v1::Objective& objective = (*host)->design().objective();
  std::vector<study::Report> reports;
  for (int i = 0; i < request.reports_size(); ++i) {
    const v1::Report& r = request.reports(i);
    if (static_cast<int>(r.outcome().note().size()) > limits.max_note_bytes) {
      return absl::InvalidArgumentError(
          absl::StrCat("reports[", i, "].outcome.note: at most ", limits.max_note_bytes, " bytes"));
    }
    absl::StatusOr<search::Outcome> outcome = codec::OutcomeFromProto(r.outcome(), objective);
    if (!outcome.ok()) {
      return absl::InvalidArgumentError(absl::StrCat("reports[", i, "].", outcome.status().message()));
    }
    reports.push_back({r.trial(), *outcome, r.outcome().note(), token_label});
  }
  return (*host)->Tell(reports, request.worker(), now, token_label);
}

absl::StatusOr<v1::RenewResponse> Renew(Registry& registry, const v1::RenewRequest& request, absl::Time now) {
  const ServiceLimits& limits = registry.limits();
  if (request.trials_size() < 1 || request.trials_size() > limits.max_ask_count) {
    return absl::InvalidArgumentError(
        absl::StrCat("trials: must hold 1..", limits.max_ask_count, " trial numbers, got ", request.trials_size()));
  }
  if (absl::Status s = CheckOptionalName(request.worker(), "worker", limits); !s.ok()) return s;
  absl::StatusOr<std::optional<absl::Duration>> lease = LeaseOf(request.lease_seconds(), limits);
  if (!lease.ok()) return lease.status();
  absl::StatusOr<std::shared_ptr<StudyHost>> host = FindStudy(registry, request.study());
  if (!host.ok()) return host.status();
  return (*host)->Renew(std::vector<int64_t>(request.trials().begin(), request.trials().end()), request.worker(),
                        *lease, now);
}

absl::StatusOr<v1::ListTrialsResponse> ListTrials(Registry& registry, const v1::ListTrialsRequest& request) {
  const ServiceLimits& limits = registry.limits();
  if (request.page_size() < 0 || request.page_size() > limits.max_page_size) {
    return absl::InvalidArgumentError(absl::StrCat("page_size: must be 0 (100) or in 1..", limits.max_page_size,
                                                   ", got ", request.page_size()));
  }
  int64_t after = 0;
  if (!request.page_token().empty() &&
      (request.page_token()[0] != 't' || !absl::SimpleAtoi(request.page_token().substr(1), &after) || after < 0)) {
    return absl::InvalidArgumentError("page_token: not a token this server issued; pass next_page_token as is");
  }
  std::optional<study::TrialState> state;
  if (request.state() != v1::TRIAL_STATE_UNSPECIFIED) {
    absl::StatusOr<study::TrialState> s = codec::TrialStateFromProto(request.state());
    if (!s.ok()) {
      return absl::InvalidArgumentError(
          "state: must be TRIAL_STATE_UNSPECIFIED (all), TRIAL_STATE_LEASED, TRIAL_STATE_REPORTED, "
          "TRIAL_STATE_LAPSED or TRIAL_STATE_VOIDED");
    }
    state = *s;
  }
  absl::StatusOr<std::shared_ptr<StudyHost>> host = FindStudy(registry, request.study());
  if (!host.ok()) return host.status();
  int64_t next_after = 0;
  v1::ListTrialsResponse response;
  for (v1::Trial& t : (*host)->Trials(state, after, request.page_size() == 0 ? 100 : request.page_size(), &next_after)) {
    *response.add_trials() = std::move(t);
  }
  if (next_after > 0) response.set_next_page_token(absl::StrCat("t", next_after));
  return response;
}

absl::StatusOr<v1::StudyView> SetPhase(Registry& registry, const v1::SetPhaseRequest& request, absl::Time now,
                                       const std::string& token_label) {
  study::PhaseCommand command;
  switch (request.command()) {
    case v1::PHASE_COMMAND_PAUSE:
      command = study::PhaseCommand::kPause;
      break;
    case v1::PHASE_COMMAND_RESUME:
      command = study::PhaseCommand::kResume;
      break;
    case v1::PHASE_COMMAND_FINISH:
      command = study::PhaseCommand::kFinish;
      break;
    default:
      return absl::InvalidArgumentError(
          "command: must be PHASE_COMMAND_PAUSE, PHASE_COMMAND_RESUME or PHASE_COMMAND_FINISH");
  }
  absl::StatusOr<std::shared_ptr<StudyHost>> host = FindStudy(registry, request.study());
  if (!host.ok()) return host.status();
  return (*host)->SetPhase(command, now, token_label);
}

}  // namespace ogive::service
