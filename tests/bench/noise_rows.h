// The noisy rows of ogive-bench-search (--noise): functions of the noisy BBOB suite measured through
// the suite's Gaussian noise, by campaigns with noise handling off, auto and replicates:4, in one run.
// Prints one JSON object; returns the process exit status.
#ifndef OGIVE_TESTS_BENCH_NOISE_ROWS_H_
#define OGIVE_TESTS_BENCH_NOISE_ROWS_H_

namespace ogive::bench {

int RunNoiseRows(int seeds, bool quick);

}  // namespace ogive::bench

#endif  // OGIVE_TESTS_BENCH_NOISE_ROWS_H_
