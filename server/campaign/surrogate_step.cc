#include "server/campaign/surrogate_step.h"

#include <algorithm>
#include <cmath>
#include <utility>

#include "server/search/rank_change.h"

namespace ogive::campaign {

int ModelWindow(int n, int lambda) {
  const search::ModelShape richest = n <= search::kMaxFullQuadraticDimension ? search::ModelShape::kFullQuadratic
                                                                             : search::ModelShape::kDiagonalQuadratic;
  return std::max(2 * search::ModelDegreesOfFreedom(richest, n), std::min(4 * lambda, kMaxCohortWindow));
}

std::shared_ptr<const search::OrdinalModel> FitModel(const search::GaussianFamily& metric,
                                                     absl::Span<const ModelPoint> window,
                                                     const search::OutcomeOrder& order) {
  std::vector<Eigen::VectorXd> x;
  std::vector<search::Outcome> outcomes;
  for (const ModelPoint& p : window) {
    x.push_back(p.x);
    outcomes.push_back(p.outcome);
  }
  absl::StatusOr<search::OrdinalModel> model = search::OrdinalModel::Fit(metric, x, search::JointRanks(outcomes, order));
  if (!model.ok()) return nullptr;
  return std::make_shared<const search::OrdinalModel>(*std::move(model));
}

double ModelAgreement(const search::OrdinalModel& model, absl::Span<const ModelPoint> cohort,
                      const search::OutcomeOrder& order) {
  std::vector<double> predicted;
  std::vector<search::Outcome> outcomes;
  for (const ModelPoint& p : cohort) {
    predicted.push_back(model.Predict(p.x));
    outcomes.push_back(p.outcome);
  }
  return search::KendallTauB(predicted, search::JointRanks(outcomes, order));
}

int ModelRankedUpdates(double tau, int lambda) {
  if (!(tau >= kModelTrustFloor)) return 0;
  const double share = std::min(1.0, (tau - kModelTrustFloor) / (kModelTrustFull - kModelTrustFloor));
  return static_cast<int>(std::floor(share * std::min(lambda - 1, kMaxModelRankedUpdates)));
}

int ScreeningDraws(double tau, int lambda) {
  return tau >= kModelTrustFull ? std::min(kScreeningDrawsPerMember * lambda, kMaxScreeningDraws) : 1;
}

int AdvanceByModel(search::SearchDistribution& d, const search::OrdinalModel& model, int updates,
                   search::RandomStream& random) {
  if (!d.gaussian().has_value() || updates <= 0) return 0;
  const search::GaussianFamily start = *d.gaussian();
  const double radius = start.ClipRadius();
  const int lambda = d.population_size();
  const search::OutcomeOrder lower{false, search::Direction::kLowerIsBetter, 0};
  int made = 0;
  for (; made < updates; ++made) {
    std::vector<search::CohortMember> members;
    std::vector<search::Outcome> predicted;
    for (int k = 0; k < lambda; ++k) {
      search::Draw draw = d.Sample(random);
      predicted.push_back(search::Outcome::Score(model.Predict(draw.x)));
      members.push_back({std::move(draw.x), draw.repaired});
    }
    absl::StatusOr<std::vector<search::TieSpan>> spans = search::RankCohort(predicted, lower);
    if (!spans.ok()) break;
    search::SearchDistribution next = d;
    if (!next.Update(members, *spans).ok()) break;
    const Eigen::VectorXd shift = next.gaussian()->state().mean - start.state().mean;
    if (start.MahalanobisNorm(start.StepOf(start.state().mean + shift, false)) > radius) break;
    d = std::move(next);
  }
  return made;
}

}  // namespace ogive::campaign
