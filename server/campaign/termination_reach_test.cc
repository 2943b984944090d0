// Every termination rule of termination.h is reachable through the engine on the outcomes it must
// handle: each test drives a campaign (restarts off) with reports only, on graded or tied cohorts,
// until it is done, and checks which rule ended it. The rules and their thresholds are those of N.
// Hansen, "The CMA Evolution Strategy: A Tutorial", arXiv:1604.00772, Appendix B (from memory), as
// docs/math.md lists them; the problems are our own constructions, each built so that one rule
// fires before the others (the reasoning is beside each).
#include <cmath>
#include <cstdint>
#include <functional>
#include <utility>
#include <string>
#include <vector>

#include "Eigen/Core"
#include "absl/status/statusor.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "server/campaign/campaign.h"
#include "server/campaign/campaign_options.h"
#include "server/campaign/campaign_test_util.h"
#include "server/campaign/trial.h"
#include "server/search/ranking.h"
#include "server/search/search_distribution.h"
#include "server/search/space.h"

namespace ogive::campaign {
namespace {

using test_util::kMinimize;
using test_util::MakeCampaign;
using test_util::RealSpace;
using test_util::RunSequential;
using test_util::UserPoint;
using ::testing::HasSubstr;

search::OutcomeOrder Graded(int levels) {
  search::OutcomeOrder order;
  order.graded = true;
  order.grade_count = levels;
  return order;
}

// The grade of value v >= 0 on a scale of `levels` grades with cut points c_j = c_1 10^(1-j): the
// number of cut points v is below (0 = worst).
int GeometricGrade(double v, double c1, int levels) {
  int grade = 0;
  double cut = c1;
  for (int j = 1; j < levels; ++j, cut /= 10) grade += v < cut;
  return grade;
}

bool Never(const search::Outcome&) { return false; }

// Drives `campaign` with `outcome` until it ends by itself (within 2·10⁵ evaluations) and checks that
// it converged with a message naming `rule`.
void ExpectEndedBy(Campaign& campaign, const std::function<search::Outcome(const Trial&)>& outcome,
                   const std::string& rule) {
  const test_util::RunResult r = RunSequential(campaign, outcome, 200000, Never, false);
  EXPECT_TRUE(r.done) << "still open after " << r.evaluations << " evaluations";
  EXPECT_EQ(campaign.engine().reason, DoneReason::kConverged);
  EXPECT_THAT(campaign.engine().phase_message, HasSubstr(rule));
}

// Tied cohorts: every outcome on the top grade, or every score equal. Both are plateaus of the
// objective, so 10 + ⌈30 n/λ⌉ such updates in a row end the campaign (EqualValues), on exactly that
// update.
TEST(TerminationReachTest, EqualValuesEndsCohortsTiedOnTheTopGradeOrOnOneScore) {
  constexpr int kN = 4;
  for (bool graded : {true, false}) {
    SCOPED_TRACE(graded ? "top grade" : "equal scores");
    CampaignOptions options;
    options.seed = 5;
    Campaign campaign = MakeCampaign(RealSpace(kN, -5, 5), graded ? Graded(3) : kMinimize, {}, options);
    const int lambda = campaign.distribution().population_size();
    const int64_t limit = 10 + (30 * kN + lambda - 1) / lambda;
    const auto outcome = [&](const Trial&) { return graded ? search::Outcome::Grade(2) : search::Outcome::Score(1.0); };
    RunSequential(campaign, outcome, (limit + 10) * lambda, Never, false);
    EXPECT_EQ(campaign.engine().phase, Phase::kDone);
    EXPECT_EQ(campaign.engine().reason, DoneReason::kConverged);
    EXPECT_THAT(campaign.engine().phase_message, HasSubstr("(EqualValues)"));
    EXPECT_EQ(campaign.engine().generation, limit);
  }
}

// A sphere seen through 60 grades ten times apart in value: the grades keep ranking cohorts far
// below the scale TolX stops at (spread < 10⁻¹² σ0, i.e. values near 10⁻²⁵ of the range squared,
// about the 27th grade), and the sphere shrinks every coordinate alike, so no single coordinate
// reaches NoEffectCoord (spread near 10⁻¹⁶ of the mean) first.
TEST(TerminationReachTest, TolXEndsAGradedSphere) {
  constexpr int kN = 3;
  CampaignOptions options;
  options.seed = 6;
  Campaign campaign = MakeCampaign(RealSpace(kN, -5, 5), Graded(60), {}, options);
  const Eigen::Vector3d x_star(1.0, -2.0, 0.5);
  const auto outcome = [&](const Trial& t) {
    return search::Outcome::Grade(GeometricGrade((UserPoint(campaign.space(), t.x) - x_star).squaredNorm(), 100.0, 60));
  };
  ExpectEndedBy(campaign, outcome, "(TolX)");
}

// An ellipsoid with axis weights 1 and 10¹⁸, seen through 80 grades ten times apart: C must learn a
// condition number near 10¹⁸ to follow it, and passes 10¹⁴ (ConditionCov) while the wide axis'
// spread is still far above TolX.
TEST(TerminationReachTest, ConditionCovEndsAGradedIllConditionedEllipsoid) {
  CampaignOptions options;
  options.seed = 7;
  Campaign campaign = MakeCampaign(RealSpace(2, -5, 5), Graded(80), {}, options);
  const auto outcome = [&](const Trial& t) {
    const Eigen::VectorXd x = UserPoint(campaign.space(), t.x);
    const double v = (x[0] - 1) * (x[0] - 1) + 1e18 * (x[1] + 1) * (x[1] + 1);
    return search::Outcome::Grade(GeometricGrade(v, 1e19, 80));
  };
  ExpectEndedBy(campaign, outcome, "condition number of C");
}

// An ellipsoid whose first axis weighs 10⁸ times the others, seen through 80 grades ten times apart,
// with the diagonal model (which has no principal axes to test): the first coordinate's spread
// reaches the last bits of its mean (0.2 σ√C_11 below half an ulp, about 3·10⁻¹⁶) while the others
// are 10⁴ times wider, far above TolX (3·10⁻¹³), so NoEffectCoord ends it.
TEST(TerminationReachTest, NoEffectCoordEndsAGradedEllipsoidWithTheDiagonalModel) {
  CampaignOptions options;
  options.seed = 9;
  search::DistributionOptions d;
  d.gaussian_model = search::GaussianModel::kDiagonal;
  Campaign campaign = MakeCampaign(RealSpace(3, -5, 5), Graded(80), d, options);
  const auto outcome = [&](const Trial& t) {
    const Eigen::VectorXd x = UserPoint(campaign.space(), t.x);
    const double v = 1e8 * (x[0] - 1.3) * (x[0] - 1.3) + (x[1] + 0.7) * (x[1] + 0.7) + (x[2] - 2.1) * (x[2] - 2.1);
    return search::Outcome::Grade(GeometricGrade(v, 1e10, 80));
  };
  ExpectEndedBy(campaign, outcome, "(NoEffectCoord)");
}

// The same weights in two dimensions, rotated by 45°: the thin direction is no coordinate, so every
// coordinate's spread stays about that of the wide axis (far above TolX and the last bits of the
// mean) while 0.1 σ along the thin principal axis stops moving the mean: NoEffectAxis.
TEST(TerminationReachTest, NoEffectAxisEndsAGradedRotatedEllipsoid) {
  CampaignOptions options;
  options.seed = 10;
  Campaign campaign = MakeCampaign(RealSpace(2, -5, 5), Graded(80), {}, options);
  const auto outcome = [&](const Trial& t) {
    const Eigen::VectorXd x = UserPoint(campaign.space(), t.x);
    const double u = (x[0] - 1.3 + x[1] + 0.7) / std::sqrt(2.0);
    const double w = (x[0] - 1.3 - x[1] - 0.7) / std::sqrt(2.0);
    return search::Outcome::Grade(GeometricGrade(1e8 * u * u + w * w, 1e10, 80));
  };
  ExpectEndedBy(campaign, outcome, "(NoEffectAxis)");
}

// Ten flags and a categorical of four options, graded by how many flags are set and whether the
// option is the third: 12 grades. Once every flag's probability sits at its margin and the
// categorical at one option, the distribution has nothing left to learn: the collapse rule ends a
// campaign with no Gaussian block.
TEST(TerminationReachTest, CollapseEndsAGradedDiscreteCampaign) {
  std::vector<search::ParameterSpec> specs;
  for (int j = 0; j < 10; ++j) specs.push_back(search::ParameterSpec::Flag("f" + std::to_string(j)));
  specs.push_back(search::ParameterSpec::Categorical("glaze", {"ash", "celadon", "tenmoku", "shino"}));
  absl::StatusOr<search::Space> space = search::Space::Create(specs);
  ASSERT_TRUE(space.ok()) << space.status();
  CampaignOptions options;
  options.seed = 8;
  Campaign campaign = MakeCampaign(*space, Graded(12), {}, options);
  const auto outcome = [&](const Trial& t) {
    int grade = 0;
    for (int j = 0; j < 10; ++j) grade += t.x[j] >= 0.5;
    return search::Outcome::Grade(grade + (t.x[10] == 2 ? 1 : 0));
  };
  ExpectEndedBy(campaign, outcome, "collapsed onto one value");
}

}  // namespace
}  // namespace ogive::campaign
