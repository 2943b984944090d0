// OGIVE_CHECK: aborts the process when a programming error (a broken invariant, not bad input) is
// found. Expected failures are absl::Status; this is only for bugs. (The Abseil release in Debian 12
// predates absl/log, so the project carries this one macro.)
#ifndef OGIVE_SERVER_BASE_CHECK_H_
#define OGIVE_SERVER_BASE_CHECK_H_

#include <cstdio>
#include <cstdlib>

#define OGIVE_CHECK(condition)                                                       \
  do {                                                                               \
    if (!(condition)) {                                                              \
      std::fprintf(stderr, "%s:%d: check failed: %s\n", __FILE__, __LINE__, #condition); \
      std::abort();                                                                  \
    }                                                                                \
  } while (false)

#endif  // OGIVE_SERVER_BASE_CHECK_H_
