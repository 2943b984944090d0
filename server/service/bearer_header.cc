#include "server/service/bearer_header.h"

#include "absl/strings/ascii.h"
#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"

namespace ogive::service {
namespace {

bool IsB64TokenChar(char c) {
  return absl::ascii_isalnum(static_cast<unsigned char>(c)) || c == '-' || c == '.' || c == '_' || c == '~' ||
         c == '+' || c == '/';
}

absl::string_view StripOws(absl::string_view value) {
  while (!value.empty() && (value.front() == ' ' || value.front() == '\t')) value.remove_prefix(1);
  while (!value.empty() && (value.back() == ' ' || value.back() == '\t')) value.remove_suffix(1);
  return value;
}

constexpr char kExpected[] = "authorization: expected 'Bearer <token>' (RFC 6750)";

}  // namespace

absl::StatusOr<absl::string_view> ParseBearerHeader(absl::string_view value) {
  value = StripOws(value);
  constexpr absl::string_view kScheme = "bearer";
  if (value.size() < kScheme.size() || !absl::EqualsIgnoreCase(value.substr(0, kScheme.size()), kScheme)) {
    return absl::UnauthenticatedError(absl::StrCat(kExpected, "; the scheme is not Bearer"));
  }
  value.remove_prefix(kScheme.size());
  if (value.empty() || value.front() != ' ') {
    return absl::UnauthenticatedError(absl::StrCat(kExpected, "; a space must follow 'Bearer'"));
  }
  while (!value.empty() && value.front() == ' ') value.remove_prefix(1);
  size_t end = 0;
  while (end < value.size() && IsB64TokenChar(value[end])) ++end;
  const size_t token_chars = end;
  while (end < value.size() && value[end] == '=') ++end;
  if (token_chars == 0) {
    return absl::UnauthenticatedError(absl::StrCat(kExpected, "; the token is empty"));
  }
  if (end != value.size()) {
    return absl::UnauthenticatedError(absl::StrCat(
        kExpected, "; the token may hold only letters, digits and - . _ ~ + / (then = padding)"));
  }
  return value;
}

}  // namespace ogive::service
