// The main() of a gtest program that drives a real ogived (with OgivedProcess): it takes the path of
// the ogived binary as its one argument after gtest's flags, and OgivedBinary() returns it.
#ifndef OGIVE_TESTS_SUPPORT_OGIVED_TEST_MAIN_H_
#define OGIVE_TESTS_SUPPORT_OGIVED_TEST_MAIN_H_

#include <string>

namespace ogive::testing {

// The ogived binary named on the command line.
const std::string& OgivedBinary();

}  // namespace ogive::testing

#endif  // OGIVE_TESTS_SUPPORT_OGIVED_TEST_MAIN_H_
