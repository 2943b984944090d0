#include "server/service/log.h"

#include <cstdio>

#include "absl/synchronization/mutex.h"
#include "absl/time/clock.h"
#include "absl/time/time.h"

namespace ogive::service {
namespace {

absl::Mutex log_mutex(absl::kConstInit);

void Append(std::string& line, std::string_view value) {
  const bool quote = value.empty() || value.find_first_of(" \"=\t\n") != std::string_view::npos;
  if (!quote) {
    line.append(value);
    return;
  }
  line.push_back('"');
  for (char c : value) {
    if (c == '"' || c == '\\') line.push_back('\\');
    line.push_back(c == '\n' ? ' ' : c);
  }
  line.push_back('"');
}

}  // namespace

void LogLine(std::initializer_list<std::pair<std::string_view, std::string>> fields) {
  std::string line = "ts=" + absl::FormatTime("%Y-%m-%dT%H:%M:%E3SZ", absl::Now(), absl::UTCTimeZone());
  for (const auto& [key, value] : fields) {
    line.push_back(' ');
    line.append(key);
    line.push_back('=');
    Append(line, value);
  }
  line.push_back('\n');
  absl::MutexLock lock(&log_mutex);
  std::fputs(line.c_str(), stderr);
}

}  // namespace ogive::service
