#include "server/service/commit_waiter.h"

#include <pthread.h>

#include <utility>

namespace ogive::service {

CommitWaiter::CommitWaiter() : thread_([this] { Loop(); }) {}

CommitWaiter::~CommitWaiter() {
  {
    absl::MutexLock lock(&mu_);
    stopping_ = true;
  }
  thread_.join();
}

void CommitWaiter::Add(std::unique_ptr<storage::PendingCommit> pending, Continuation then) {
  absl::MutexLock lock(&mu_);
  queue_.push_back(Item{std::move(pending), std::move(then)});
}

void CommitWaiter::Loop() {
  pthread_setname_np(pthread_self(), "ogive-replies");  // named for top -H, perf and gdb
  std::deque<Item> taken;
  while (true) {
    {
      absl::MutexLock lock(&mu_);
      mu_.Await(absl::Condition(
          +[](CommitWaiter* w) ABSL_EXCLUSIVE_LOCKS_REQUIRED(w->mu_) { return w->stopping_ || !w->queue_.empty(); },
          this));
      if (queue_.empty()) return;  // stopping, and every continuation has run
      taken.swap(queue_);
    }
    // Items queued together mostly share a transaction: the first Wait() blocks for it, the others
    // return at once.
    for (Item& item : taken) {
      const absl::Status committed = item.pending->Wait();
      item.pending.reset();
      std::move(item.then)(committed);
    }
    taken.clear();
  }
}

}  // namespace ogive::service
