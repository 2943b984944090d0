// Roles and the methods of the ogive service they may call. Roles are ordered: a reader may read
// (GetCampaign, ListCampaigns, ListTrials, Watch); a worker may also Ask, Tell and Renew; an admin may
// also CreateCampaign and SetPhase. Plain values; thread-safe.
#ifndef OGIVE_SERVER_SERVICE_ROLE_H_
#define OGIVE_SERVER_SERVICE_ROLE_H_

#include <optional>

#include "absl/strings/string_view.h"

namespace ogive::service {

enum class Role { kReader = 1, kWorker = 2, kAdmin = 3 };

// "reader", "worker", "admin": the words of the CLI, the tokens table and the messages.
const char* RoleName(Role role);
// The role named `name` (exactly one of the words above), or nullopt.
std::optional<Role> ParseRole(absl::string_view name);

// The methods of ogive.v1.Ogive that carry a token check.
enum class Method {
  kCreateCampaign,
  kGetCampaign,
  kListCampaigns,
  kAsk,
  kTell,
  kRenew,
  kListTrials,
  kListGenerations,
  kSetPhase,
  kWatch
};

// The method's name as in service.proto ("Ask").
const char* MethodName(Method method);
// The lowest role that may call `method`.
Role RequiredRole(Method method);
// "worker or admin": the roles that may call `method`, for messages.
const char* RolesAllowed(Method method);

}  // namespace ogive::service

#endif  // OGIVE_SERVER_SERVICE_ROLE_H_
