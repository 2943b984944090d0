#include "tests/support/ogived_test_main.h"

#include <cstdio>
#include <string>

#include "gtest/gtest.h"

namespace ogive::testing {
namespace {
std::string* g_ogived = new std::string();
}  // namespace

const std::string& OgivedBinary() { return *g_ogived; }

}  // namespace ogive::testing

int main(int argc, char** argv) {
  ::testing::InitGoogleTest(&argc, argv);
  if (argc != 2) {
    std::fprintf(stderr, "usage: %s [gtest flags] PATH/TO/ogived\n", argv[0]);
    return 2;
  }
  *ogive::testing::g_ogived = argv[1];
  return RUN_ALL_TESTS();
}
