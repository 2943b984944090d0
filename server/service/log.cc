#include "server/service/log.h"

#include <pthread.h>
#include <unistd.h>

#include <cerrno>
#include <cstdint>
#include <cstdlib>
#include <thread>

#include "absl/base/thread_annotations.h"
#include "absl/strings/str_cat.h"
#include "absl/synchronization/mutex.h"
#include "absl/time/clock.h"
#include "absl/time/time.h"

namespace ogive::service {
namespace {

bool IsControl(char c) { return static_cast<unsigned char>(c) < 0x20 || c == '\x7f'; }

// One value: at most kMaxLogValueBytes of it (cut at a UTF-8 character boundary, the original length
// noted), quoted when it holds a blank, a quote, '=' or a control character, control characters
// escaped, so that one value is always one field of one line.
void Append(std::string& line, std::string_view value) {
  const size_t original = value.size();
  bool cut = false;
  if (value.size() > kMaxLogValueBytes) {
    size_t end = kMaxLogValueBytes;
    while (end > 0 && (static_cast<unsigned char>(value[end]) & 0xC0) == 0x80) --end;  // continuation byte
    value = value.substr(0, end);
    cut = true;
  }
  bool quote = value.empty() || cut;
  for (char c : value) quote = quote || c == ' ' || c == '"' || c == '=' || c == '\\' || IsControl(c);
  if (!quote) {
    line.append(value);
    return;
  }
  line.push_back('"');
  for (char c : value) {
    switch (c) {
      case '"':
      case '\\':
        line.push_back('\\');
        line.push_back(c);
        break;
      case '\n':
        line.append("\\n");
        break;
      case '\t':
        line.append("\\t");
        break;
      case '\r':
        line.append("\\r");
        break;
      default:
        if (IsControl(c)) {
          absl::StrAppend(&line, "\\x", absl::Hex(static_cast<unsigned char>(c), absl::kZeroPad2));
        } else {
          line.push_back(c);
        }
    }
  }
  if (cut) absl::StrAppend(&line, "...[", original, " bytes]");
  line.push_back('"');
}

// Writes all of `bytes` to standard error; gives up on the rest at an error other than EINTR.
void WriteAll(std::string_view bytes) {
  while (!bytes.empty()) {
    const ssize_t n = ::write(STDERR_FILENO, bytes.data(), bytes.size());
    if (n < 0 && errno == EINTR) continue;
    if (n <= 0) return;
    bytes.remove_prefix(static_cast<size_t>(n));
  }
}

// The queue and its writer thread. Made once and never destroyed, so that a line logged while the
// process exits (from another thread, or an atexit handler) finds it alive.
class LogQueue {
 public:
  static constexpr absl::Duration kGather = absl::Milliseconds(5);

  static LogQueue& Get() {
    static LogQueue* const queue = [] {
      auto* q = new LogQueue();
      std::atexit([] { Get().Flush(); });
      return q;
    }();
    return *queue;
  }

  void Push(std::string line) {
    absl::MutexLock lock(&mu_);
    if (queued_.size() + line.size() > kMaxQueuedLogBytes) {
      ++dropped_;
      return;
    }
    if (dropped_ > 0) {
      queued_.append(absl::StrCat("ts=", line.substr(3, 24), " event=log_dropped lines=", dropped_, "\n"));
      dropped_ = 0;
    }
    queued_.append(line);
    ++pushed_;
  }

  void Flush() {
    struct Written {
      const LogQueue* queue;
      uint64_t target;
      bool Done() const ABSL_NO_THREAD_SAFETY_ANALYSIS { return queue->written_ >= target; }
    };
    absl::MutexLock lock(&mu_);
    flush_requested_ = true;
    const Written written{this, pushed_};
    mu_.AwaitWithTimeout(absl::Condition(&written, &Written::Done), absl::Seconds(2));
  }

 private:
  LogQueue() { std::thread([this] { Loop(); }).detach(); }

  void Loop() {
    pthread_setname_np(pthread_self(), "ogive-log");  // named for top -H, perf and gdb
    std::string taken;
    while (true) {
      uint64_t upto;
      {
        absl::MutexLock lock(&mu_);
        mu_.Await(absl::Condition(
            +[](LogQueue* q) ABSL_EXCLUSIVE_LOCKS_REQUIRED(q->mu_) { return !q->queued_.empty(); }, this));
        // Let lines gather for a moment (one wake-up and one write for many), unless someone waits.
        mu_.AwaitWithTimeout(absl::Condition(&flush_requested_), kGather);
        flush_requested_ = false;
        taken.swap(queued_);
        upto = pushed_;
      }
      WriteAll(taken);
      taken.clear();
      if (taken.capacity() > (1 << 20)) taken.shrink_to_fit();
      absl::MutexLock lock(&mu_);
      written_ = upto;
    }
  }

  absl::Mutex mu_;
  std::string queued_ ABSL_GUARDED_BY(mu_);
  uint64_t pushed_ ABSL_GUARDED_BY(mu_) = 0;   // lines queued so far
  uint64_t written_ ABSL_GUARDED_BY(mu_) = 0;  // of those, lines written
  uint64_t dropped_ ABSL_GUARDED_BY(mu_) = 0;  // lines refused since the last one queued
  bool flush_requested_ ABSL_GUARDED_BY(mu_) = false;
};

// Appends `now` as 2026-12-01T22:50:01.123Z. The part up to the second is formatted once per second
// and thread (absl::FormatTime costs a few microseconds; every ask and tell logs a line).
void AppendTimestamp(std::string& line, absl::Time now) {
  thread_local int64_t cached_second = INT64_MIN;
  thread_local std::string cached;  // "2026-12-01T22:50:01"
  const int64_t millis = absl::ToUnixMillis(now);
  const int64_t second = millis >= 0 ? millis / 1000 : (millis - 999) / 1000;
  if (second != cached_second) {
    cached = absl::FormatTime("%Y-%m-%dT%H:%M:%S", absl::FromUnixSeconds(second), absl::UTCTimeZone());
    cached_second = second;
  }
  const int64_t fraction = millis - second * 1000;
  line.append(cached);
  line.push_back('.');
  line.push_back(static_cast<char>('0' + fraction / 100));
  line.push_back(static_cast<char>('0' + fraction / 10 % 10));
  line.push_back(static_cast<char>('0' + fraction % 10));
  line.push_back('Z');
}

}  // namespace

void LogLine(std::initializer_list<std::pair<std::string_view, std::string>> fields) {
  std::string line = "ts=";
  AppendTimestamp(line, absl::Now());
  for (const auto& [key, value] : fields) {
    line.push_back(' ');
    line.append(key);
    line.push_back('=');
    Append(line, value);
  }
  line.push_back('\n');
  LogQueue::Get().Push(std::move(line));
}

void FlushLog() { LogQueue::Get().Flush(); }

}  // namespace ogive::service
