// Protocol. f101 (sphere) and f104 (Rosenbrock) with moderate Gaussian noise (β = 0.01) and f116
// (ellipsoid, condition 10⁴) with severe Gaussian noise (β = 1), of the noisy BBOB suite (Hansen,
// Auger, Finck, Ros, INRIA RR-6869; definitions from memory, see tests/support/bbob.h), n = 5 and
// 10, through tests/support/problems (bounds [−5, 5]^n, start uniform in [−4, 4]^n, σ0 = 0.2 of the
// range). Each campaign runs one trial at a time (ask, measure with noise, tell) for 10⁴·n
// evaluations, IPOP restarts on. Its result is the best noise-free f − f_opt among the points it had
// measured (the suite's own way of scoring a noisy run, as we remember it), floored at 10⁻⁸ (the
// noise model is exact below it). Rows compare, on the same instances and seeds, noise handling
// off, auto and replicates:4: the median result over seeds, and off/auto as a ratio (above 1: auto
// is better), and how many runs reached the floor.
#include "tests/bench/noise_rows.h"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <string>
#include <vector>

#include "absl/time/time.h"
#include "server/campaign/campaign.h"
#include "server/search/random_stream.h"
#include "tests/support/bbob.h"
#include "tests/support/problems.h"

namespace ogive::bench {
namespace {

double BestGap(const testing::Problem& problem, double beta, campaign::NoiseOptions noise, long budget,
               uint64_t seed) {
  campaign::CampaignOptions options;
  options.seed = seed;
  options.restarts = true;
  options.noise = noise;
  campaign::Campaign c = *campaign::Campaign::Create(problem.space, search::OutcomeOrder{}, problem.options, options);
  search::RandomStream noise_stream(seed ^ 0x9e3779b97f4a7c15u);
  double best = INFINITY;
  absl::Time now = absl::UnixEpoch();
  for (long k = 0; k < budget; ++k) {
    absl::StatusOr<std::vector<campaign::Trial>> asked = c.Ask(1, "w", std::nullopt, now);
    if (!asked.ok()) break;  // done: converged without budget left
    const campaign::Trial& t = asked->front();
    const double gap = problem.gap(problem.space.Decode(t.x));
    best = std::min(best, gap);
    now += absl::Seconds(1);
    const campaign::Report report{
        t.number, search::Outcome::Score(testing::NoisyGap(gap, beta, noise_stream.Normal())), ""};
    (void)c.Tell({&report, 1}, now);
  }
  return std::max(best, 1e-8);
}

// Runs that reached the floor 10⁻⁸.
int AtFloor(const std::vector<double>& v) {
  int k = 0;
  for (double x : v) k += x <= 1e-8;
  return k;
}

// The median; for an even count the geometric mean of the middle two (results span decades).
double Median(std::vector<double> v) {
  std::sort(v.begin(), v.end());
  return v.size() % 2 ? v[v.size() / 2] : std::sqrt(v[v.size() / 2 - 1] * v[v.size() / 2]);
}

}  // namespace

int RunNoiseRows(int seeds, bool quick) {
  struct Case {
    std::string problem;
    int n;
    double beta;
  };
  std::vector<Case> cases;
  for (int n : {5, 10}) {
    cases.push_back({"f101", n, 0.01});
    cases.push_back({"f104", n, 0.01});
    cases.push_back({"f116", n, 1.0});
  }
  if (quick) cases = {{"f116", 5, 1.0}};
  campaign::NoiseOptions off, autom, replicates;
  autom.mode = campaign::NoiseMode::kAuto;
  replicates.mode = campaign::NoiseMode::kReplicates;
  replicates.replicates = 4;
  std::printf("{\n  \"benchmark\": \"ogive-bench-search --noise\",\n  \"seeds\": %d,\n  \"rows\": [", seeds);
  bool first = true;
  for (const Case& c : cases) {
    const long budget = quick ? 2000 : 10000L * c.n;
    std::vector<double> r_off, r_auto, r_rep;
    for (int s = 0; s < seeds; ++s) {
      const testing::Problem problem = testing::MakeProblem(c.problem, c.n, 3000 + s);
      r_off.push_back(BestGap(problem, c.beta, off, budget, 5000 + s));
      r_auto.push_back(BestGap(problem, c.beta, autom, budget, 5000 + s));
      r_rep.push_back(BestGap(problem, c.beta, replicates, budget, 5000 + s));
    }
    const double m_off = Median(r_off), m_auto = Median(r_auto), m_rep = Median(r_rep);
    std::printf("%s\n    {\"problem\": \"%s\", \"n\": %d, \"beta\": %g, \"budget\": %ld, "
                "\"median_gap_off\": %.3g, \"median_gap_auto\": %.3g, \"median_gap_replicates4\": %.3g, "
                "\"off_over_auto\": %.3g, \"off_over_replicates4\": %.3g, \"at_floor_off\": %d, "
                "\"at_floor_auto\": %d, \"at_floor_replicates4\": %d}",
                first ? "" : ",", c.problem.c_str(), c.n, c.beta, budget, m_off, m_auto, m_rep, m_off / m_auto,
                m_off / m_rep, AtFloor(r_off), AtFloor(r_auto), AtFloor(r_rep));
    first = false;
    std::fflush(stdout);
  }
  std::printf("\n  ]\n}\n");
  return 0;
}

}  // namespace ogive::bench
