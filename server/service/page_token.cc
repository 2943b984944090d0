#include "server/service/page_token.h"

#include <algorithm>
#include <cstdint>

#include "absl/strings/escaping.h"
#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "server/base/reason.h"

namespace ogive::service {
namespace {

// 32-bit FNV-1a (Fowler, Noll, Vo; the published offset basis 2166136261 and prime 16777619) over
// the listing letter, the campaign and the filter, each followed by a 0 byte so that fields cannot
// run into each other.
uint32_t ScopeDigest(const PageScope& scope) {
  uint32_t hash = 2166136261u;
  auto add = [&hash](absl::string_view bytes) {
    for (char c : bytes) {
      hash ^= static_cast<unsigned char>(c);
      hash *= 16777619u;
    }
    hash *= 16777619u;  // the 0 separator: xor with 0 changes nothing, the multiply still mixes
  };
  add(absl::string_view(&scope.listing, 1));
  add(scope.campaign);
  add(scope.filter);
  return hash;
}

constexpr absl::string_view kNotOurs = "not a token this server issued; pass next_page_token as is";

absl::Status Refused(absl::string_view why) {
  return WithReason(absl::InvalidArgumentError(absl::StrCat("page_token: ", why)),
                    {std::string(reason::kInvalidField), {{"field", "page_token"}}, std::nullopt});
}

}  // namespace

std::string MakePageToken(const PageScope& scope, absl::string_view position) {
  return absl::StrCat(absl::string_view(&scope.listing, 1), absl::StrFormat("%08x", ScopeDigest(scope)),
                      absl::WebSafeBase64Escape(position));
}

size_t MaxPageTokenBytes(int max_position_bytes) {
  const size_t bytes = static_cast<size_t>(std::max(max_position_bytes, 20));  // an int64 has 20 digits
  return 1 + 8 + 4 * ((bytes + 2) / 3);
}

absl::StatusOr<std::string> ReadPageToken(const PageScope& scope, absl::string_view token) {
  if (token.empty()) return std::string();
  if (token.size() < 9) return Refused(kNotOurs);
  uint32_t digest = 0;
  if (!absl::SimpleHexAtoi(token.substr(1, 8), &digest)) return Refused(kNotOurs);
  if (token[0] != scope.listing) {
    return Refused("not a token this server issued for this listing (it belongs to another one); start this "
                   "one without a token");
  }
  if (digest != ScopeDigest(scope)) {
    // The campaign list has no campaign or filter: a digest that does not match is damage.
    if (scope.listing == 'c') return Refused(kNotOurs);
    return Refused("not a token this server issued for this campaign and filter (it belongs to another "
                   "campaign or state); start again without a token");
  }
  std::string position;
  if (!absl::WebSafeBase64Unescape(token.substr(9), &position)) return Refused(kNotOurs);
  return position;
}

absl::StatusOr<int64_t> ReadPageNumber(const PageScope& scope, absl::string_view token) {
  absl::StatusOr<std::string> position = ReadPageToken(scope, token);
  if (!position.ok()) return position.status();
  int64_t after = 0;
  if (!position->empty() && (!absl::SimpleAtoi(*position, &after) || after < 0)) return Refused(kNotOurs);
  return after;
}

}  // namespace ogive::service
