// CommitWaiter: continuations run after their write's outcome is known, one at a time, in the order
// they were added, and the destructor runs every one still queued.
#include "server/service/commit_waiter.h"

#include <algorithm>
#include <memory>
#include <thread>
#include <vector>

#include "absl/synchronization/mutex.h"
#include "absl/synchronization/notification.h"
#include "gtest/gtest.h"

namespace ogive::service {
namespace {

// A write whose outcome the test decides, when it decides.
class ControlledCommit final : public storage::PendingCommit {
 public:
  explicit ControlledCommit(std::shared_ptr<absl::Notification> released, absl::Status outcome)
      : released_(std::move(released)), outcome_(std::move(outcome)) {}
  absl::Status Wait() override {
    released_->WaitForNotification();
    return outcome_;
  }

 private:
  std::shared_ptr<absl::Notification> released_;
  absl::Status outcome_;
};

struct Log {
  absl::Mutex mu;
  std::vector<std::pair<int, absl::StatusCode>> seen ABSL_GUARDED_BY(mu);
  void Add(int i, const absl::Status& s) {
    absl::MutexLock lock(&mu);
    seen.emplace_back(i, s.code());
  }
  size_t size() {
    absl::MutexLock lock(&mu);
    return seen.size();
  }
};

TEST(CommitWaiterTest, ContinuationsWaitForTheirWriteAndRunInOrder) {
  Log log;
  auto first = std::make_shared<absl::Notification>();
  auto second = std::make_shared<absl::Notification>();
  {
    CommitWaiter waiter;
    waiter.Add(std::make_unique<ControlledCommit>(first, absl::OkStatus()),
               [&](absl::Status s) { log.Add(1, s); });
    waiter.Add(std::make_unique<ControlledCommit>(second, absl::UnavailableError("disk")),
               [&](absl::Status s) { log.Add(2, s); });
    second->Notify();  // the later write is done first, but its continuation waits its turn
    absl::SleepFor(absl::Milliseconds(50));
    EXPECT_EQ(log.size(), 0u);
    first->Notify();
    // The destructor runs both before it returns.
  }
  absl::MutexLock lock(&log.mu);
  ASSERT_EQ(log.seen.size(), 2u);
  EXPECT_EQ(log.seen[0], std::make_pair(1, absl::StatusCode::kOk));
  EXPECT_EQ(log.seen[1], std::make_pair(2, absl::StatusCode::kUnavailable));
}

TEST(CommitWaiterTest, ManyThreadsAddAndEveryContinuationRunsOnce) {
  Log log;
  auto done = std::make_shared<absl::Notification>();
  done->Notify();
  {
    CommitWaiter waiter;
    std::vector<std::thread> threads;
    for (int t = 0; t < 8; ++t) {
      threads.emplace_back([&, t] {
        for (int i = 0; i < 500; ++i) {
          const int id = t * 1000 + i;
          waiter.Add(std::make_unique<ControlledCommit>(done, absl::OkStatus()),
                     [&log, id](absl::Status s) { log.Add(id, s); });
        }
      });
    }
    for (std::thread& thread : threads) thread.join();
  }
  absl::MutexLock lock(&log.mu);
  ASSERT_EQ(log.seen.size(), 8u * 500u);
  std::vector<int> ids;
  for (const auto& [id, code] : log.seen) {
    EXPECT_EQ(code, absl::StatusCode::kOk);
    ids.push_back(id);
  }
  std::sort(ids.begin(), ids.end());
  EXPECT_EQ(std::adjacent_find(ids.begin(), ids.end()), ids.end());  // none twice
  // Per adding thread, in the order added.
  std::vector<int> last(8, -1);
  for (const auto& [id, code] : log.seen) {
    EXPECT_GT(id % 1000, last[static_cast<size_t>(id / 1000)]);
    last[static_cast<size_t>(id / 1000)] = id % 1000;
  }
}

}  // namespace
}  // namespace ogive::service
