// A program with a data race, for the `tsan` build only: ctest expects TSan's report of it, so a
// tsan run in which ThreadSanitizer no longer reports races in our code (options that ignore too
// much, annotations that hide accesses) fails here. The counter is shared by two threads; half of
// the increments take the mutex and half do not.
#include <thread>

#include "absl/synchronization/mutex.h"

namespace {
absl::Mutex mu;
int counter = 0;

void Count() {
  for (int i = 0; i < 1000; ++i) {
    if (i % 2 == 0) {
      absl::MutexLock lock(&mu);
      ++counter;
    } else {
      ++counter;  // the race
    }
  }
}
}  // namespace

int main() {
  std::thread a(Count);
  std::thread b(Count);
  a.join();
  b.join();
  return counter > 0 ? 0 : 1;
}
