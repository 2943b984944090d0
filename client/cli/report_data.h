// The numbers a campaign report plots, shaped from what the server returns (the campaign's view, its
// trials, its generation views): the running best outcome, the band of each parameter within its
// bounds, trial states per block of trial numbers, the staleness of each consumed outcome, and the
// best trials in the campaign's order. Pure functions of the protos; report_page.h draws them.
#ifndef OGIVE_CLIENT_CLI_REPORT_DATA_H_
#define OGIVE_CLIENT_CLI_REPORT_DATA_H_

#include <cstdint>
#include <vector>

#include "ogive/v1/service.pb.h"
#include "ogive/v1/campaign.pb.h"

namespace ogive::cli {

// The band of mean ± 2 spreads of a real or integer parameter, clipped to [low, high]. On a log
// scale the spread s of a Marginal is exp(ln m + σ) - m, so the band is m ·/÷ (1 + s/m)²: symmetric
// in ln. A non-finite or non-positive mean on a log scale gives the whole range.
struct BandRange {
  double lower = 0;
  double upper = 0;
};
BandRange TwoSpreadBand(double mean, double spread, double low, double high, bool log);

// One reported trial with a score or a grade, in trial-number order, and the best outcome up to and
// including it. Values are scores, or grade indices on the scale (0 = worst).
struct BestPoint {
  int64_t trial = 0;
  double value = 0;
  double best = 0;
};
std::vector<BestPoint> RunningBest(const std::vector<v1::Trial>& trials, const v1::Objective& objective);

// Trial numbers of the infeasible outcomes, in order.
std::vector<int64_t> InfeasibleTrials(const std::vector<v1::Trial>& trials);

// The trials of one block of consecutive trial numbers by state. A reported trial that came after its
// lease lapsed counts as `late`, not `reported`.
struct StateBlock {
  int64_t first = 0;  // trial numbers first..last
  int64_t last = 0;
  int leased = 0;
  int reported = 0;
  int late = 0;
  int lapsed = 0;
  int voided = 0;
};
// Blocks of equal width (a round number: 1, 2, 5, 10, 20, ...) so that there are at most
// `max_blocks` of them; the last block may be partly filled. Empty without trials.
std::vector<StateBlock> StatesByBlock(const std::vector<v1::Trial>& trials, int max_blocks);

// One consumed outcome: the generation that consumed it and its staleness (the generations between
// the one it was sampled from and the update that used it: consumed_by - 1 - generation).
struct ConsumedOutcome {
  int64_t consumed_by = 0;
  int64_t staleness = 0;
};
std::vector<ConsumedOutcome> ConsumedStaleness(const std::vector<v1::Trial>& trials);

// True when outcome `a` ranks before `b` in the campaign's order: scores and grades by the objective,
// both above infeasible; trials without an informative outcome last. Ties are not "before".
bool RanksBefore(const v1::Outcome& a, const v1::Outcome& b, const v1::Objective& objective);

// Up to `count` trials with informative outcomes, best first; equal outcomes in trial-number order.
std::vector<v1::Trial> BestTrials(const std::vector<v1::Trial>& trials, const v1::Objective& objective,
                                  size_t count);

// The generations where a restart began (the first generation of each epoch after the first).
std::vector<int64_t> RestartGenerations(const std::vector<v1::GenerationView>& generations);

}  // namespace ogive::cli

#endif  // OGIVE_CLIENT_CLI_REPORT_DATA_H_
