// OneMax and LeadingOnes: the standard pseudo-Boolean test problems, for tests and benchmarks of
// searches over bit strings. Both are to be maximized; the optimum of each is the all-ones string,
// with value n = bits.size(). See e.g. S. Droste, T. Jansen, I. Wegener, "On the analysis of the
// (1+1) evolutionary algorithm", Theoretical Computer Science 276, 2002 (definitions from memory).
#ifndef OGIVE_TESTS_SUPPORT_DISCRETE_PROBLEMS_H_
#define OGIVE_TESTS_SUPPORT_DISCRETE_PROBLEMS_H_

#include <vector>

namespace ogive::testing {

// OneMax(x) = sum_i x_i: the number of entries equal to 1. Entries are expected to be 0 or 1; any
// other value counts as not 1.
inline int OneMax(const std::vector<int>& bits) {
  int ones = 0;
  for (int b : bits) ones += (b == 1) ? 1 : 0;
  return ones;
}

// LeadingOnes(x) = sum_i prod_{j<=i} x_j: the length of the longest prefix of 1 entries.
inline int LeadingOnes(const std::vector<int>& bits) {
  int count = 0;
  for (int b : bits) {
    if (b != 1) break;
    ++count;
  }
  return count;
}

}  // namespace ogive::testing

#endif  // OGIVE_TESTS_SUPPORT_DISCRETE_PROBLEMS_H_
