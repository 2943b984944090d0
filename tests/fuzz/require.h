// OGIVE_FUZZ_REQUIRE: how the fuzz targets report a broken invariant. It prints what was expected and
// what was found, then aborts, so libFuzzer (or the corpus replay under ctest) stops at the input that
// broke it and keeps that input as a crash reproducer.
#ifndef OGIVE_TESTS_FUZZ_REQUIRE_H_
#define OGIVE_TESTS_FUZZ_REQUIRE_H_

#include <cstdio>
#include <cstdlib>
#include <string>

#include "absl/strings/str_cat.h"

#define OGIVE_FUZZ_REQUIRE(condition, ...)                                                         \
  do {                                                                                            \
    if (!(condition)) {                                                                           \
      const std::string ogive_fuzz_message = absl::StrCat(__VA_ARGS__);                           \
      std::fprintf(stderr, "%s:%d: invariant broken: %s\n  %s\n", __FILE__, __LINE__, #condition, \
                   ogive_fuzz_message.c_str());                                                   \
      std::abort();                                                                               \
    }                                                                                             \
  } while (false)

#endif  // OGIVE_TESTS_FUZZ_REQUIRE_H_
