// The structured log: lines keep their order and format, a request never blocks on standard error,
// and lines refused while standard error is stuck are counted, never lost silently.
#include "server/service/log.h"

#include <fcntl.h>
#include <unistd.h>

#include <string>
#include <thread>
#include <vector>

#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_split.h"
#include "absl/time/clock.h"
#include "absl/time/time.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"

namespace ogive::service {
namespace {

using ::testing::HasSubstr;
using ::testing::StartsWith;

// Points file descriptor 2 at a pipe for the life of the object; Drain reads what arrived until a line
// containing `marker`.
class CapturedStderr {
 public:
  CapturedStderr() {
    int fds[2];
    if (pipe(fds) != 0) std::abort();
    read_end_ = fds[0];
    saved_ = dup(STDERR_FILENO);
    dup2(fds[1], STDERR_FILENO);
    close(fds[1]);
  }
  ~CapturedStderr() {
    dup2(saved_, STDERR_FILENO);
    close(saved_);
    close(read_end_);
  }

  std::vector<std::string> DrainUntil(const std::string& marker) {
    std::string text;
    char buffer[1 << 16];
    const absl::Time give_up = absl::Now() + absl::Seconds(20);
    while (text.find(marker) == std::string::npos && absl::Now() < give_up) {
      const ssize_t n = read(read_end_, buffer, sizeof buffer);
      if (n <= 0) break;
      text.append(buffer, static_cast<size_t>(n));
    }
    return absl::StrSplit(text, '\n', absl::SkipEmpty());
  }

 private:
  int read_end_ = -1;
  int saved_ = -1;
};

TEST(LogTest, LinesFromManyThreadsArriveWholeAndInOrderPerThread) {
  CapturedStderr captured;
  constexpr int kThreads = 4, kPerThread = 500;
  std::vector<std::thread> threads;
  for (int t = 0; t < kThreads; ++t) {
    threads.emplace_back([t] {
      for (int i = 0; i < kPerThread; ++i) {
        LogLine({{"event", "order"}, {"thread", absl::StrCat(t)}, {"i", absl::StrCat(i)}, {"note", "two words"}});
      }
    });
  }
  for (std::thread& t : threads) t.join();
  LogLine({{"event", "end_of_order"}});
  FlushLog();
  const std::vector<std::string> lines = captured.DrainUntil("event=end_of_order");
  std::vector<int> next(kThreads, 0);
  int seen = 0;
  for (const std::string& line : lines) {
    if (line.find("event=order") == std::string::npos) continue;
    ++seen;
    // `ts=2026-12-01T22:50:01.123Z event=order thread=T i=I note="two words"`
    EXPECT_THAT(line, StartsWith("ts=20"));
    EXPECT_THAT(line, HasSubstr(" note=\"two words\""));
    int t = -1, i = -1;
    for (absl::string_view field : absl::StrSplit(line, ' ')) {
      if (absl::ConsumePrefix(&field, "thread=")) {
        ASSERT_TRUE(absl::SimpleAtoi(field, &t));
      }
      if (absl::ConsumePrefix(&field, "i=")) {
        ASSERT_TRUE(absl::SimpleAtoi(field, &i));
      }
    }
    ASSERT_GE(t, 0);
    ASSERT_LT(t, kThreads);
    EXPECT_EQ(i, next[t]) << line;
    next[t] = i + 1;
  }
  EXPECT_EQ(seen, kThreads * kPerThread);
}

// What a client sends can neither forge a line nor grow one without bound: values are escaped
// (control characters, quotes, backslashes) and cut at kMaxLogValueBytes with the length noted.
TEST(LogTest, ValuesAreEscapedAndCutSoThatOneFieldStaysOneFieldOfOneLine) {
  CapturedStderr captured;
  const std::string huge(3 << 20, 'n');  // a 3 MiB name
  LogLine({{"event", "hostile"}, {"worker", "w\nts=0 event=tell \"x\"\t\x01\\"}, {"campaign", huge},
           {"note", std::string(255, 'a') + "\xC3\xA9" + std::string(50, 'b')}});  // a cut inside "é" backs off
  LogLine({{"event", "end_of_hostile"}});
  FlushLog();
  const std::vector<std::string> lines = captured.DrainUntil("event=end_of_hostile");
  std::vector<std::string> hostile;
  for (const std::string& line : lines) {
    if (line.find("event=hostile") != std::string::npos) hostile.push_back(line);
  }
  ASSERT_EQ(hostile.size(), 1u) << "the newline in the worker's name made a second line";
  const std::string& line = hostile[0];
  EXPECT_THAT(line, HasSubstr(R"( worker="w\nts=0 event=tell \"x\"\t\x01\\")"));
  EXPECT_THAT(line, HasSubstr(absl::StrCat(" campaign=\"", std::string(kMaxLogValueBytes, 'n'), "...[3145728 bytes]\"")));
  EXPECT_LT(line.size(), 4 * kMaxLogValueBytes);
  EXPECT_THAT(line, HasSubstr(absl::StrCat(" note=\"", std::string(255, 'a'), "...[307 bytes]\"")));
}

// The timestamp is UTC (RFC 3339, milliseconds), and lines across a change of second carry their own
// second (the formatted second is reused within a second).
TEST(LogTest, TimestampsAreUtcMillisecondsOfTheMomentTheLineWasMade) {
  CapturedStderr captured;
  std::vector<absl::Time> before, after;
  for (int i = 0; i < 6; ++i) {
    before.push_back(absl::Now());
    LogLine({{"event", "clock"}, {"i", absl::StrCat(i)}});
    after.push_back(absl::Now());
    absl::SleepFor(absl::Milliseconds(230));  // six lines over more than one second
  }
  LogLine({{"event", "end_of_clock"}});
  FlushLog();
  int seen = 0;
  for (const std::string& line : captured.DrainUntil("event=end_of_clock")) {
    if (line.find("event=clock") == std::string::npos) continue;
    ASSERT_THAT(line, StartsWith("ts="));
    const std::string stamp = line.substr(3, line.find(' ') - 3);
    ASSERT_EQ(stamp.size(), 24u) << line;  // 2026-12-01T22:50:01.123Z
    absl::Time at;
    std::string error;
    ASSERT_TRUE(absl::ParseTime("%Y-%m-%dT%H:%M:%E3SZ", stamp, absl::UTCTimeZone(), &at, &error)) << stamp << error;
    ASSERT_LT(seen, 6);
    EXPECT_GE(at, absl::FromUnixMillis(absl::ToUnixMillis(before[seen]))) << stamp;
    EXPECT_LE(at, after[seen]) << stamp;
    ++seen;
  }
  EXPECT_EQ(seen, 6);
}

TEST(LogTest, StuckStderrNeitherBlocksNorLosesLinesSilently) {
  CapturedStderr captured;
  // Nobody reads the pipe while these are logged: the queue fills, and LogLine must still return at
  // once. 20 MiB is more than the pipe, the writer's batch and the queue can hold together (each
  // value is at most kMaxLogValueBytes, so it takes many lines).
  const std::string pad(kMaxLogValueBytes, 'x');
  constexpr int kLines = 80000;
  const absl::Time start = absl::Now();
  for (int i = 0; i < kLines; ++i) LogLine({{"event", "fill"}, {"pad", pad}});
  EXPECT_LT(absl::Now() - start, absl::Seconds(10)) << "LogLine waited for standard error";
  int received = 0;
  long dropped = 0;
  std::thread reader([&] {
    for (const std::string& line : captured.DrainUntil("event=end_of_fill")) {
      if (line.find("event=fill") != std::string::npos) ++received;
      absl::string_view rest = line;
      const size_t at = rest.find("event=log_dropped lines=");
      if (at != absl::string_view::npos) {
        long n = 0;
        ASSERT_TRUE(absl::SimpleAtoi(rest.substr(at + 24), &n)) << line;
        dropped += n;
      }
    }
  });
  // A line after the queue drained carries the count of the lines refused before it.
  for (int attempt = 0; attempt < 3; ++attempt) FlushLog();  // each waits at most 2 s
  LogLine({{"event", "end_of_fill"}});
  FlushLog();
  reader.join();
  EXPECT_GT(dropped, 0);
  EXPECT_EQ(received + dropped, kLines);
}

}  // namespace
}  // namespace ogive::service
