#include "server/base/reason.h"

#include <utility>
#include <vector>

#include "absl/strings/escaping.h"
#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_join.h"
#include "absl/strings/str_split.h"

namespace ogive {
namespace {

// The payload's type URL, private to this file: the payload never leaves the process (the gRPC
// adapter sends a google.rpc.ErrorInfo instead).
constexpr absl::string_view kPayloadUrl = "ogive.internal/reason";

// Lines of C-escaped fields: the reason, the retry delay in nanoseconds (or empty), then a key and a
// value per metadata entry.
std::string Encode(const Reason& reason) {
  std::vector<std::string> lines = {
      absl::CEscape(reason.reason),
      reason.retry_delay.has_value() ? absl::StrCat(absl::ToInt64Nanoseconds(*reason.retry_delay)) : ""};
  for (const auto& [key, value] : reason.metadata) {
    lines.push_back(absl::CEscape(key));
    lines.push_back(absl::CEscape(value));
  }
  return absl::StrJoin(lines, "\n");
}

std::optional<Reason> Decode(absl::string_view payload) {
  std::vector<std::string> lines = absl::StrSplit(payload, '\n');
  if (lines.size() < 2 || lines.size() % 2 != 0) return std::nullopt;
  Reason out;
  if (!absl::CUnescape(lines[0], &out.reason)) return std::nullopt;
  if (!lines[1].empty()) {
    int64_t nanoseconds = 0;
    if (!absl::SimpleAtoi(lines[1], &nanoseconds)) return std::nullopt;
    out.retry_delay = absl::Nanoseconds(nanoseconds);
  }
  for (size_t i = 2; i + 1 < lines.size(); i += 2) {
    std::string key;
    std::string value;
    if (!absl::CUnescape(lines[i], &key) || !absl::CUnescape(lines[i + 1], &value)) return std::nullopt;
    out.metadata.emplace(std::move(key), std::move(value));
  }
  return out;
}

}  // namespace

absl::Status WithReason(absl::Status status, Reason reason) {
  if (status.ok()) return status;
  status.SetPayload(kPayloadUrl, absl::Cord(Encode(reason)));
  return status;
}

std::optional<Reason> ReasonOf(const absl::Status& status) {
  auto payload = status.GetPayload(kPayloadUrl);
  if (!payload.has_value()) return std::nullopt;
  return Decode(std::string(*payload));
}

}  // namespace ogive
