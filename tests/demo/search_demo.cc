// ogive-demo-search: the search core on a simulated solver farm, in-process.
//
// A farm runs a flow solver whose wall time depends on five settings: the relaxation factor, the
// linear-solver tolerance (log scale), the mesh refinement level, the preconditioner and whether the
// unknowns are reordered. The "run time" below is an invented model for the demo, with a little
// measurement noise; the search sees only the order of the run times. Each generation prints the
// best run so far and the distribution's state.
#include <cmath>
#include <cstdio>
#include <string>
#include <vector>

#include "server/search/random_stream.h"
#include "server/search/ranking.h"
#include "server/search/search_distribution.h"
#include "server/search/space.h"

namespace {

using namespace ogive::search;  // NOLINT: a short demo program

// Simulated minutes for one solver run (invented for the demo).
double SimulatedMinutes(const Candidate& c, RandomStream& noise) {
  const double relaxation = std::get<double>(c[0]);
  const double tolerance = std::get<double>(c[1]);
  const int64_t mesh = std::get<int64_t>(c[2]);
  const std::string& preconditioner = std::get<std::string>(c[3]);
  const bool reorder = std::get<bool>(c[4]);
  // Iterations grow away from the best relaxation, and with a tighter tolerance; a finer mesh costs
  // more per iteration but a too coarse one needs a rerun (modelled as a penalty).
  double iterations = 40.0 * (1.0 + 8.0 * std::pow(relaxation - 1.62, 2)) * (1.0 + 0.08 * -std::log10(tolerance));
  if (preconditioner == "ilu") iterations *= 0.55;
  if (preconditioner == "amg") iterations *= 0.35;
  const double per_iteration = 0.02 * std::pow(1.7, static_cast<double>(mesh)) * (reorder ? 0.8 : 1.0) *
                               (preconditioner == "amg" ? 1.3 : 1.0);
  const double rerun = mesh < 4 ? 25.0 * (4 - mesh) : 0.0;
  const double accuracy_penalty = tolerance > 1e-6 ? 30.0 * std::log10(tolerance / 1e-6) : 0.0;
  return iterations * per_iteration + rerun + accuracy_penalty + 0.05 * noise.Normal();
}

std::string Show(const Candidate& c) {
  char buffer[200];
  std::snprintf(buffer, sizeof buffer, "relaxation=%.3f tolerance=%.2e mesh_level=%lld preconditioner=%s reorder=%s",
                std::get<double>(c[0]), std::get<double>(c[1]), static_cast<long long>(std::get<int64_t>(c[2])),
                std::get<std::string>(c[3]).c_str(), std::get<bool>(c[4]) ? "on" : "off");
  return buffer;
}

}  // namespace

int main() {
  const Space space = *Space::Create({
      ParameterSpec::Real("relaxation", 0.5, 1.95),
      ParameterSpec::Real("tolerance", 1e-10, 1e-3, /*log=*/true),
      ParameterSpec::Integer("mesh_level", 1, 8),
      ParameterSpec::Categorical("preconditioner", {"jacobi", "ilu", "amg"}),
      ParameterSpec::Flag("reorder"),
  });
  SearchDistribution distribution = *SearchDistribution::Create(space, {});
  RandomStream random(2026);
  RandomStream noise(7);
  double best = INFINITY;
  Candidate best_candidate;
  int evaluations = 0;
  std::printf("ogive search core demo: tuning a simulated solver farm (population %d)\n",
              distribution.population_size());
  for (int generation = 0; generation < 60; ++generation) {
    std::vector<CohortMember> cohort;
    std::vector<Outcome> outcomes;
    for (int i = 0; i < distribution.population_size(); ++i) {
      const Draw draw = distribution.Sample(random);
      const Candidate candidate = space.Decode(draw.x);
      const double minutes = SimulatedMinutes(candidate, noise);
      ++evaluations;
      if (minutes < best) {
        best = minutes;
        best_candidate = candidate;
      }
      cohort.push_back({draw.x, draw.repaired});
      outcomes.push_back(Outcome::Score(minutes));
    }
    if (absl::Status s = distribution.Update(cohort, *RankCohort(outcomes, OutcomeOrder{})); !s.ok()) {
      std::fprintf(stderr, "update failed: %s\n", std::string(s.message()).c_str());
      return 1;
    }
    if (generation % 10 == 9) {
      const DistributionSummary summary = distribution.Summary();
      std::printf("generation %2d  runs %4d  best %.2f min  step size %.3g  P(reorder)=%.2f  P(amg)=%.2f\n",
                  generation + 1, evaluations, best, summary.gaussian->sigma, summary.flag_probabilities[0],
                  summary.option_probabilities[0][2]);
    }
  }
  std::printf("best run: %.2f min with %s\n", best, Show(best_candidate).c_str());
  std::printf("candidates are suggestions: check them against your site's limits before running them.\n");
  return 0;
}
