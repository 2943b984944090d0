// SurrogateStep: how a campaign uses the ordinal model of its outcomes (search/ordinal_model.h) between
// the updates made from true outcomes (docs/math.md, "A surrogate of the ranking").
//
// At each update from a cohort of true outcomes the engine (1) measures how well the model fitted at
// the previous update ordered this cohort, Kendall's τ_b; (2) refits the model on a window of the most
// recent outcomes of the epoch, in the coordinates of the distribution just updated; (3) when τ_b was
// high enough, advances the distribution by a few further updates whose cohorts are drawn from it and
// ranked by the model alone (model-ranked updates, after lq-CMA-ES, Hansen, GECCO 2019, which updates
// from model-ranked populations while the model's τ on truly evaluated points stays high), never
// leaving the ellipsoid of radius c_y around the mean the true update gave; (4) refits once more in the coordinates of the
// distribution it ends with, which is the model kept (and rebuilt the same way when a campaign is
// restored). While τ_b is high, the first trial an Ask hands out in each generation is the model's
// best of many draws (lq-CMA-ES evaluates its model's best candidates first). Only the real and
// integer block is modelled: campaigns with flags or options do not use the model.
//
// Pure functions of their arguments; randomness only from the stream passed in.
#ifndef OGIVE_SERVER_CAMPAIGN_SURROGATE_STEP_H_
#define OGIVE_SERVER_CAMPAIGN_SURROGATE_STEP_H_

#include <memory>
#include <vector>

#include "Eigen/Core"
#include "absl/types/span.h"
#include "server/search/ordinal_model.h"
#include "server/search/random_stream.h"
#include "server/search/ranking.h"
#include "server/search/search_distribution.h"

namespace ogive::campaign {

// One stored outcome the model may learn from: the real and integer coordinates and the outcome.
struct ModelPoint {
  Eigen::VectorXd x;
  search::Outcome outcome;
};

// How many of the epoch's most recent outcomes the model learns from: twice the full quadratic's
// coefficients (or the diagonal one's above kMaxFullQuadraticDimension), and at least four cohorts
// but no more than kMaxCohortWindow for that (a population grown by restarts or noise would
// otherwise make every refit slow for no gain: one cohort of it is data enough).
inline constexpr int kMaxCohortWindow = 400;
int ModelWindow(int n, int lambda);

// The model fitted to `window` (informative outcomes) in the coordinates of `metric`; nullptr when
// it cannot be fitted (too few points, or all tied).
std::shared_ptr<const search::OrdinalModel> FitModel(const search::GaussianFamily& metric,
                                                     absl::Span<const ModelPoint> window,
                                                     const search::OutcomeOrder& order);

// τ_b between the model's values and the true outcomes of a cohort; NaN when undefined (a cohort
// all tied, or fewer than two members).
double ModelAgreement(const search::OrdinalModel& model, absl::Span<const ModelPoint> cohort,
                      const search::OutcomeOrder& order);

// Model-ranked updates to make after a true cohort on which the model reached τ_b = tau: none below
// kModelTrustFloor (or NaN), min(λ − 1, kMaxModelRankedUpdates) from kModelTrustFull on (one true
// cohort then buys as many updates as λ evaluations would), in proportion between.
// At most kMaxModelRankedUpdates per true cohort: each costs λ draws and predictions, and a large
// population (restarts, noise) needs few updates per cohort anyway.
inline constexpr int kMaxModelRankedUpdates = 30;
inline constexpr double kModelTrustFloor = 0.5;
inline constexpr double kModelTrustFull = 0.85;
int ModelRankedUpdates(double tau, int lambda);

// The first trial of each generation is the model's pick among this many draws from the
// distribution: 10λ, at most kMaxScreeningDraws, from kModelTrustFull on, else 1 (no pick). The cap
// bounds the Ask that makes the pick when the population has grown large (restarts, noise, many
// workers): each draw is predicted and compared with every live trial out. The other trials of the generation are
// plain samples, so the cohort stays a sample of the distribution but for one injected member, and a
// batch for several workers is as diverse as the distribution.
inline constexpr int kScreeningDrawsPerMember = 10;
inline constexpr int kMaxScreeningDraws = 400;
int ScreeningDraws(double tau, int lambda);

// Trials still out count in the pick: it is the model's best among the draws at least this far
// (Mahalanobis distance in σ-units of the current distribution) from every live trial out, whose
// outcomes the model has not seen. Two independent samples lie about √(2n) apart; within one unit of
// a given sample fall under 4% of the draws in n = 5 (χ²₅ at 1), so the rule removes only the draws
// that would repeat a pending evaluation (our choice; a kriging believer or a penalty would serve too).
inline constexpr double kPickSeparation = 1.0;

// Makes up to `updates` model-ranked updates of the Gaussian block of `d`: each draws λ samples from
// `random`, ranks them by `model` and updates. Stops early when the mean would leave the ellipsoid of
// Mahalanobis radius c_y = √n + 2n/(n + 2) around the mean the updates started from (in the starting
// distribution's metric): the model knows only the region its points came from. Returns the number of
// updates made.
int AdvanceByModel(search::SearchDistribution& d, const search::OrdinalModel& model, int updates,
                   search::RandomStream& random);

}  // namespace ogive::campaign

#endif  // OGIVE_SERVER_CAMPAIGN_SURROGATE_STEP_H_
