// Page tokens of the listing methods (ListCampaigns, ListTrials, ListGenerations). A token is opaque
// to clients and bound to what it was issued for: the listing, the campaign and the filter. A token
// passed to another listing, another campaign or with another filter is refused with
// INVALID_ARGUMENT (reason INVALID_FIELD, field page_token) instead of silently skipping rows.
//
// Layout: one letter for the listing, eight hex digits of a 32-bit FNV-1a digest of the campaign
// and the filter, then the position (the last row served) in unpadded web-safe base64. The digest
// guards against mistakes, not against forgery: a page token grants nothing the caller's token
// does not.
#ifndef OGIVE_SERVER_SERVICE_PAGE_TOKEN_H_
#define OGIVE_SERVER_SERVICE_PAGE_TOKEN_H_

#include <cstddef>
#include <cstdint>
#include <string>

#include "absl/status/statusor.h"
#include "absl/strings/string_view.h"

namespace ogive::service {

// Rows per page when a request asks for 0.
inline constexpr int kDefaultPageSize = 100;

// The longest token MakePageToken makes for a position of up to `max_position_bytes` bytes (the
// server's longest campaign name; numbers are shorter): what a listing request may carry.
size_t MaxPageTokenBytes(int max_position_bytes);

// What a token is bound to.
struct PageScope {
  char listing;          // 'c' campaigns, 't' trials, 'g' generations
  std::string campaign;  // empty for the campaign list
  std::string filter;    // e.g. the trial state asked for; empty when there is none
};

// A token that resumes `scope`'s listing after `position`.
std::string MakePageToken(const PageScope& scope, absl::string_view position);

// The position `token` resumes after, "" for an empty token (the first page). INVALID_ARGUMENT
// (reason INVALID_FIELD, field page_token) when the token was not made by MakePageToken for `scope`.
absl::StatusOr<std::string> ReadPageToken(const PageScope& scope, absl::string_view token);

// The same for listings whose position is a number (trials, generations): 0 for an empty token,
// INVALID_ARGUMENT as above for anything but a token of a number >= 0.
absl::StatusOr<int64_t> ReadPageNumber(const PageScope& scope, absl::string_view token);

}  // namespace ogive::service

#endif  // OGIVE_SERVER_SERVICE_PAGE_TOKEN_H_
