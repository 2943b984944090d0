// Checks of OneMax and LeadingOnes (tests/support/discrete_problems.h) on strings whose values are
// counted by hand.
#include "tests/support/discrete_problems.h"

#include <vector>

#include <gtest/gtest.h>

namespace {

using ::ogive::testing::LeadingOnes;
using ::ogive::testing::OneMax;

TEST(OneMaxTest, CountsOnes) {
  EXPECT_EQ(OneMax({}), 0);
  EXPECT_EQ(OneMax({0, 0, 0}), 0);
  EXPECT_EQ(OneMax({1, 0, 1, 1}), 3);
  EXPECT_EQ(OneMax({0, 1, 0, 0, 1}), 2);
  EXPECT_EQ(OneMax(std::vector<int>(10, 1)), 10);  // The optimum: n.
}

TEST(LeadingOnesTest, CountsThePrefixOfOnes) {
  EXPECT_EQ(LeadingOnes({}), 0);
  EXPECT_EQ(LeadingOnes({0, 1, 1}), 0);
  EXPECT_EQ(LeadingOnes({1, 1, 0, 1}), 2);
  EXPECT_EQ(LeadingOnes({1, 0, 1, 1, 1}), 1);
  EXPECT_EQ(LeadingOnes(std::vector<int>(10, 1)), 10);  // The optimum: n.
  // Differs from OneMax once a zero comes before other ones.
  EXPECT_EQ(LeadingOnes({1, 0, 1, 1}), 1);
  EXPECT_EQ(OneMax({1, 0, 1, 1}), 3);
}

}  // namespace
