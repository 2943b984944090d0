// CommitWaiter: runs a continuation once a queued store write has committed, on a thread of its own,
// so that a request handler need not hold a thread while its write waits for the fsync it shares
// with other writes. Continuations run one at a time, in the order they were added (the order the
// writes were queued, which is the order the store commits them).
//
// Thread-safe. The store behind the pending writes must outlive the waiter. The destructor runs every
// continuation still queued (each after its write completed) before it returns.
#ifndef OGIVE_SERVER_SERVICE_COMMIT_WAITER_H_
#define OGIVE_SERVER_SERVICE_COMMIT_WAITER_H_

#include <deque>
#include <memory>
#include <thread>

#include "absl/base/thread_annotations.h"
#include "absl/functional/any_invocable.h"
#include "absl/status/status.h"
#include "absl/synchronization/mutex.h"
#include "storage/store.h"

namespace ogive::service {

class CommitWaiter {
 public:
  // Receives the write's outcome (PendingCommit::Wait()).
  using Continuation = absl::AnyInvocable<void(absl::Status)>;

  CommitWaiter();
  ~CommitWaiter();
  CommitWaiter(const CommitWaiter&) = delete;
  CommitWaiter& operator=(const CommitWaiter&) = delete;

  // Calls `then` with the outcome of `pending` once it is known. `then` runs on the waiter's
  // thread and may block (later continuations wait for it).
  void Add(std::unique_ptr<storage::PendingCommit> pending, Continuation then);

 private:
  struct Item {
    std::unique_ptr<storage::PendingCommit> pending;
    Continuation then;
  };
  void Loop();

  absl::Mutex mu_;
  std::deque<Item> queue_ ABSL_GUARDED_BY(mu_);
  bool stopping_ ABSL_GUARDED_BY(mu_) = false;
  std::thread thread_;  // last: started once the members above exist
};

}  // namespace ogive::service

#endif  // OGIVE_SERVER_SERVICE_COMMIT_WAITER_H_
