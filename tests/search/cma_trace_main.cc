// Prints CMA-ES traces for tests/search/cma_reference_check.py: for each configuration, the start
// state, and per generation the samples GaussianFamily drew, their f-values and the state after its
// update. The Python script transcribes the tutorial's equations independently and replays the trace.
#include <cmath>
#include <cstdio>
#include <string>
#include <vector>

#include "Eigen/Core"
#include "server/search/gaussian_family.h"
#include "server/search/random_stream.h"
#include "server/search/ranking.h"

namespace {

using ogive::search::GaussianFamily;

void PrintVector(const Eigen::VectorXd& v) {
  std::printf("[");
  for (int i = 0; i < v.size(); ++i) std::printf("%s%.17g", i ? "," : "", v[i]);
  std::printf("]");
}

void PrintMatrix(const Eigen::MatrixXd& m) {
  std::printf("[");
  for (int r = 0; r < m.rows(); ++r) {
    std::printf("%s", r ? "," : "");
    PrintVector(m.row(r).transpose());
  }
  std::printf("]");
}

struct TraceConfig {
  std::string name;
  int n;
  double tie_quantum;  // f is rounded to multiples of this (0 = exact) to create ties
  uint64_t seed;
};

void PrintTrace(const TraceConfig& config, bool first) {
  const int n = config.n;
  const int lambda = ogive::search::DefaultPopulationSize(n);
  const Eigen::VectorXd start = Eigen::VectorXd::Constant(n, 0.5);
  const double sigma0 = 0.3;
  GaussianFamily family =
      *GaussianFamily::Create(start, sigma0, lambda, /*diagonal=*/false, std::vector<int64_t>(n, 0));
  ogive::search::RandomStream random(config.seed);
  // An ellipsoid centred away from the start, so the mean, σ and C all move.
  Eigen::VectorXd optimum(n), scale(n);
  for (int j = 0; j < n; ++j) {
    optimum[j] = 0.2 + 0.6 * j / std::max(1, n - 1);
    scale[j] = std::pow(10.0, 2.0 * j / std::max(1, n - 1));
  }
  std::printf("%s{\"name\":\"%s\",\"n\":%d,\"lambda\":%d,\"diagonal\":false,\"initial\":{\"mean\":", first ? "" : ",",
              config.name.c_str(), n, lambda);
  PrintVector(start);
  std::printf(",\"sigma\":%.17g},\"steps\":[", sigma0);
  for (int g = 0; g < 50; ++g) {
    std::vector<ogive::search::GaussianSample> cohort;
    std::vector<ogive::search::Outcome> outcomes;
    for (int i = 0; i < lambda; ++i) {
      Eigen::VectorXd x = family.Sample(random);
      double f = (x - optimum).cwiseProduct(scale).squaredNorm();
      if (config.tie_quantum > 0) f = std::round(f / config.tie_quantum) * config.tie_quantum;
      cohort.push_back({x, false});
      outcomes.push_back(ogive::search::Outcome::Score(f));
    }
    const ogive::search::OutcomeOrder order;
    const auto spans = *ogive::search::RankCohort(outcomes, order);
    if (!family.Update(cohort, spans).ok()) std::abort();
    std::printf("%s{\"x\":[", g ? "," : "");
    for (int i = 0; i < lambda; ++i) {
      std::printf("%s", i ? "," : "");
      PrintVector(cohort[i].x);
    }
    std::printf("],\"f\":[");
    for (int i = 0; i < lambda; ++i) std::printf("%s%.17g", i ? "," : "", outcomes[i].score);
    const auto& s = family.state();
    std::printf("],\"after\":{\"mean\":");
    PrintVector(s.mean);
    std::printf(",\"sigma\":%.17g,\"p_sigma\":", s.sigma);
    PrintVector(s.p_sigma);
    std::printf(",\"p_c\":");
    PrintVector(s.p_c);
    std::printf(",\"C\":");
    PrintMatrix(s.covariance);
    std::printf("}}");
  }
  std::printf("]}");
}

}  // namespace

int main() {
  const std::vector<TraceConfig> configs = {
      {"full_n2_ties", 2, 0.05, 11}, {"full_n10", 10, 0.0, 12}, {"full_n40", 40, 0.0, 13},
      {"full_n200_lazy_eigen", 200, 0.0, 14}};
  std::printf("{\"traces\":[");
  for (size_t k = 0; k < configs.size(); ++k) PrintTrace(configs[k], k == 0);
  std::printf("]}\n");
  return 0;
}
