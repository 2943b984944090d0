// ogive: the command-line client of an ogive server. See client/cli/cli.h.
#include <cstdio>
#include <cstring>

#include "absl/synchronization/mutex.h"
#include "client/cli/cli.h"

int main(int argc, char** argv) {
  if (argc == 2 && std::strcmp(argv[1], "--version") == 0) {
    std::printf("ogive %s\n", OGIVE_VERSION);
    return 0;
  }
  // Lock-order checking is for tests; here it would cost a graph update on every lock gRPC takes.
  absl::SetMutexDeadlockDetectionMode(absl::OnDeadlockCycle::kIgnore);
  return ogive::cli::Main(argc, argv);
}
