// Protocol. Problems f1 (sphere) and f10 (rotated ellipsoid, condition 10⁶) of BBOB (Hansen et al.,
// INRIA RR-6829), n = 5 and 10, through tests/support/problems (bounds [−5, 5]^n, start uniform in
// [−4, 4]^n, σ0 = 0.2 of the range). Each is observed only through a scale of L = 3, 5 or 7 grades
// with geometric cut points c_j = f_0 r^(1−j), j = 1..L−1, r = 10 or 100, f_0 = 4 (f(start) − f_opt):
// the grade is the number of cut points that f − f_opt is below, so the start lies in grade 1 (the
// second-lowest; grade 0 is the region much worse than the start) and the top grade L−1 is
// f − f_opt < c_{L−1}. A run succeeds when it samples the top grade within 2·10⁴ evaluations.
// The graded campaign runs as a design's default does (`model: auto` leaves graded campaigns without
// the ordinal surrogate). Compared in the same run, on the same instances and seeds:
//   with model  the same graded campaign with `model: on`: its success rate;
//   exact       the campaign given f − f_opt as a score, as the default runs it (with the model):
//               evaluations until f − f_opt < c_{L−1};
//   uniform     2·10⁴ points uniform in the box: success when one is in the top grade.
// The campaign runs one trial at a time (ask, evaluate, tell), with IPOP restarts on. max_spread is
// the largest σ√λmax(C) seen after any update (internal units; 1 = the box).
#include "tests/bench/grade_rows.h"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <string>
#include <vector>

#include "absl/time/time.h"
#include "server/campaign/campaign.h"
#include "server/search/random_stream.h"
#include "tests/support/problems.h"

namespace ogive::bench {
namespace {

constexpr long kBudget = 20000;

struct Scale {
  std::vector<double> cuts;  // c_1 > c_2 > ... > c_{L-1}
  int Grade(double gap) const {
    int g = 0;
    for (double c : cuts) g += gap < c;
    return g;
  }
  int top() const { return static_cast<int>(cuts.size()); }
};

struct RunResult {
  long evaluations = -1;  // to the top grade (or below its cut), -1 = not within the budget
  double max_spread = 0;
};

// Runs a campaign on `problem`, graded on `scale` or scored with the gap, until the top grade.
RunResult RunCampaign(const testing::Problem& problem, const Scale& scale, bool graded, bool surrogate, uint64_t seed) {
  search::OutcomeOrder order;
  if (graded) {
    order.graded = true;
    order.grade_count = scale.top() + 1;
  }
  campaign::CampaignOptions options;
  options.seed = seed;
  options.restarts = true;
  options.surrogate = surrogate;
  campaign::Campaign c = *campaign::Campaign::Create(problem.space, order, problem.options, options);
  RunResult result;
  absl::Time now = absl::UnixEpoch();
  for (long k = 1; k <= kBudget; ++k) {
    absl::StatusOr<std::vector<campaign::Trial>> asked = c.Ask(1, "w", std::nullopt, now);
    if (!asked.ok()) return result;  // done: converged without budget left
    const campaign::Trial& t = asked->front();
    const double gap = problem.gap(problem.space.Decode(t.x));
    const int grade = scale.Grade(gap);
    now += absl::Seconds(1);
    const campaign::Report report{t.number, graded ? search::Outcome::Grade(grade) : search::Outcome::Score(gap), ""};
    (void)c.Tell({&report, 1}, now);
    if (const auto& g = c.distribution().gaussian(); g.has_value()) {
      result.max_spread = std::max(result.max_spread, g->LargestSpread());
    }
    if (grade == scale.top()) {
      result.evaluations = k;
      return result;
    }
  }
  return result;
}

bool UniformSucceeds(const testing::Problem& problem, const Scale& scale, uint64_t seed) {
  search::RandomStream random(seed);
  Eigen::VectorXd x(problem.space.size());
  for (long k = 0; k < kBudget; ++k) {
    for (int j = 0; j < x.size(); ++j) x[j] = random.Uniform();
    if (scale.Grade(problem.gap(problem.space.Decode(x))) == scale.top()) return true;
  }
  return false;
}

double Median(std::vector<double> v) {
  if (v.empty()) return -1;
  std::sort(v.begin(), v.end());
  return v.size() % 2 ? v[v.size() / 2] : 0.5 * (v[v.size() / 2 - 1] + v[v.size() / 2]);
}

}  // namespace

int RunGradeRows(int seeds, bool quick) {
  struct Case {
    std::string problem;
    int n, levels;
    double ratio;
  };
  std::vector<Case> cases;
  for (const char* problem : {"f1", "f10"}) {
    for (int n : {5, 10}) {
      for (double r : {10.0, 100.0}) {
        for (int levels : {3, 5, 7}) cases.push_back({problem, n, levels, r});
      }
    }
  }
  if (quick) cases = {{"f1", 5, 5, 10.0}};
  std::printf("{\n  \"benchmark\": \"ogive-bench-search --grades\",\n  \"budget\": %ld,\n  \"seeds\": %d,\n"
              "  \"rows\": [",
              kBudget, seeds);
  bool first = true;
  for (const Case& c : cases) {
    int graded_ok = 0, exact_ok = 0, uniform_ok = 0, modelled_ok = 0;
    std::vector<double> graded_evals, exact_evals;
    double max_spread = 0;
    for (int s = 0; s < seeds; ++s) {
      const testing::Problem problem = testing::MakeProblem(c.problem, c.n, 1000 + s);
      Eigen::VectorXd start(c.n);
      for (int j = 0; j < c.n; ++j) start[j] = *problem.options.start[j];
      const double f0 = 4 * problem.gap(problem.space.Decode(start));
      Scale scale;
      for (int j = 1; j < c.levels; ++j) scale.cuts.push_back(f0 * std::pow(c.ratio, 1 - j));
      const RunResult graded = RunCampaign(problem, scale, /*graded=*/true, /*surrogate=*/false, 7000 + s);
      const RunResult modelled = RunCampaign(problem, scale, /*graded=*/true, /*surrogate=*/true, 7000 + s);
      const RunResult exact = RunCampaign(problem, scale, /*graded=*/false, /*surrogate=*/true, 7000 + s);
      modelled_ok += modelled.evaluations > 0;
      max_spread = std::max(max_spread, graded.max_spread);
      if (graded.evaluations > 0) {
        ++graded_ok;
        graded_evals.push_back(static_cast<double>(graded.evaluations));
      }
      if (exact.evaluations > 0) {
        ++exact_ok;
        exact_evals.push_back(static_cast<double>(exact.evaluations));
      }
      uniform_ok += UniformSucceeds(problem, scale, 9000 + s);
    }
    const double graded_median = Median(graded_evals);
    const double exact_median = Median(exact_evals);
    std::printf("%s\n    {\"problem\": \"%s\", \"n\": %d, \"levels\": %d, \"r\": %g, \"success_rate\": %.3f, "
                "\"median_evals\": %.1f, \"exact_success_rate\": %.3f, \"exact_median_evals\": %.1f, "
                "\"evals_ratio_to_exact\": %.3f, \"uniform_success_rate\": %.3f, \"max_spread\": %.3f, "
                "\"success_rate_with_model\": %.3f}",
                first ? "" : ",", c.problem.c_str(), c.n, c.levels, c.ratio,
                static_cast<double>(graded_ok) / seeds, graded_median, static_cast<double>(exact_ok) / seeds,
                exact_median, graded_median > 0 && exact_median > 0 ? graded_median / exact_median : -1.0,
                static_cast<double>(uniform_ok) / seeds, max_spread, static_cast<double>(modelled_ok) / seeds);
    first = false;
  }
  std::printf("\n  ]\n}\n");
  return 0;
}

}  // namespace ogive::bench
