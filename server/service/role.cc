#include "server/service/role.h"

namespace ogive::service {

const char* RoleName(Role role) {
  switch (role) {
    case Role::kReader:
      return "reader";
    case Role::kWorker:
      return "worker";
    case Role::kAdmin:
      return "admin";
  }
  return "unknown";
}

std::optional<Role> ParseRole(absl::string_view name) {
  for (Role role : {Role::kReader, Role::kWorker, Role::kAdmin}) {
    if (name == RoleName(role)) return role;
  }
  return std::nullopt;
}

const char* MethodName(Method method) {
  switch (method) {
    case Method::kCreateCampaign:
      return "CreateCampaign";
    case Method::kGetCampaign:
      return "GetCampaign";
    case Method::kListCampaigns:
      return "ListCampaigns";
    case Method::kAsk:
      return "Ask";
    case Method::kTell:
      return "Tell";
    case Method::kRenew:
      return "Renew";
    case Method::kListTrials:
      return "ListTrials";
    case Method::kListGenerations:
      return "ListGenerations";
    case Method::kSetPhase:
      return "SetPhase";
    case Method::kWatch:
      return "Watch";
  }
  return "unknown";
}

Role RequiredRole(Method method) {
  switch (method) {
    case Method::kGetCampaign:
    case Method::kListCampaigns:
    case Method::kListTrials:
    case Method::kListGenerations:
    case Method::kWatch:
      return Role::kReader;
    case Method::kAsk:
    case Method::kTell:
    case Method::kRenew:
      return Role::kWorker;
    case Method::kCreateCampaign:
    case Method::kSetPhase:
      return Role::kAdmin;
  }
  return Role::kAdmin;
}

const char* RolesAllowed(Method method) {
  switch (RequiredRole(method)) {
    case Role::kReader:
      return "reader, worker or admin";
    case Role::kWorker:
      return "worker or admin";
    case Role::kAdmin:
      return "admin";
  }
  return "admin";
}

}  // namespace ogive::service
