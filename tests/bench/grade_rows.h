// The graded rows of ogive-bench-search (--grades): a campaign that sees a problem only through an
// ordered scale of grades, against the same campaign given exact scores and against uniform random
// sampling with the same budget. Prints one JSON object; returns the process exit status.
#ifndef OGIVE_TESTS_BENCH_GRADE_ROWS_H_
#define OGIVE_TESTS_BENCH_GRADE_ROWS_H_

namespace ogive::bench {

int RunGradeRows(int seeds, bool quick);

}  // namespace ogive::bench

#endif  // OGIVE_TESTS_BENCH_GRADE_ROWS_H_
