#include "client/cli/report_data.h"

#include <algorithm>
#include <cmath>

namespace ogive::cli {
namespace {

int GradeIndex(const v1::Objective& objective, const std::string& label) {
  const auto& labels = objective.grade_scale().labels();
  for (int i = 0; i < labels.size(); ++i) {
    if (labels[i] == label) return i;
  }
  return -1;
}

// Larger is better: 2 for a score or grade, 1 for infeasible, 0 for nothing informative.
int Tier(const v1::Outcome& o) {
  switch (o.kind_case()) {
    case v1::Outcome::kScore:
    case v1::Outcome::kGrade:
      return 2;
    case v1::Outcome::kInfeasible:
      return 1;
    default:
      return 0;
  }
}

}  // namespace

BandRange TwoSpreadBand(double mean, double spread, double low, double high, bool log) {
  BandRange band{low, high};
  if (!std::isfinite(mean) || !std::isfinite(spread)) return band;
  if (log) {
    if (!(mean > 0)) return band;
    const double ratio = 1 + std::max(spread, 0.0) / mean;
    band = {mean / (ratio * ratio), mean * ratio * ratio};
  } else {
    band = {mean - 2 * spread, mean + 2 * spread};
  }
  band.lower = std::clamp(band.lower, low, high);
  band.upper = std::clamp(band.upper, low, high);
  return band;
}

std::vector<BestPoint> RunningBest(const std::vector<v1::Trial>& trials, const v1::Objective& objective) {
  std::vector<const v1::Trial*> sorted;
  for (const v1::Trial& t : trials) {
    if (t.outcome().has_score() || t.outcome().has_grade()) sorted.push_back(&t);
  }
  std::sort(sorted.begin(), sorted.end(),
            [](const v1::Trial* a, const v1::Trial* b) { return a->number() < b->number(); });
  const bool lower_is_better = objective.direction() == v1::DIRECTION_LOWER_IS_BETTER;
  std::vector<BestPoint> out;
  for (const v1::Trial* t : sorted) {
    double value = 0;
    if (t->outcome().has_score()) {
      value = t->outcome().score();
    } else {
      const int index = GradeIndex(objective, t->outcome().grade());
      if (index < 0) continue;  // a label not on the scale: nothing to place it by
      value = index;
    }
    double best = value;
    if (!out.empty()) {
      const double previous = out.back().best;
      const bool better = objective.has_grade_scale() ? value > previous
                          : lower_is_better            ? value < previous
                                                       : value > previous;
      if (!better) best = previous;
    }
    out.push_back({t->number(), value, best});
  }
  return out;
}

std::vector<int64_t> InfeasibleTrials(const std::vector<v1::Trial>& trials) {
  std::vector<int64_t> out;
  for (const v1::Trial& t : trials) {
    if (t.outcome().has_infeasible()) out.push_back(t.number());
  }
  std::sort(out.begin(), out.end());
  return out;
}

std::vector<StateBlock> StatesByBlock(const std::vector<v1::Trial>& trials, int max_blocks) {
  std::vector<StateBlock> blocks;
  if (trials.empty() || max_blocks < 1) return blocks;
  int64_t last = 0;
  for (const v1::Trial& t : trials) last = std::max(last, t.number());
  // Widths 1, 2, 5, 10, 20, 50, ... until the blocks fit.
  int64_t width = 1, magnitude = 1;
  for (int k = 0; (last + width - 1) / width > max_blocks; k = (k + 1) % 3) {
    constexpr int64_t kMantissa[] = {2, 5, 10};
    width = kMantissa[k] * magnitude;
    if (k == 2) magnitude *= 10;
  }
  const int64_t count = (last + width - 1) / width;
  for (int64_t b = 0; b < count; ++b) blocks.push_back({b * width + 1, std::min((b + 1) * width, last)});
  for (const v1::Trial& t : trials) {
    if (t.number() < 1) continue;
    StateBlock& block = blocks[static_cast<size_t>((t.number() - 1) / width)];
    switch (t.state()) {
      case v1::TRIAL_STATE_LEASED:
        ++block.leased;
        break;
      case v1::TRIAL_STATE_REPORTED:
        ++(t.late() ? block.late : block.reported);
        break;
      case v1::TRIAL_STATE_LAPSED:
        ++block.lapsed;
        break;
      case v1::TRIAL_STATE_VOIDED:
        ++block.voided;
        break;
      default:
        break;
    }
  }
  return blocks;
}

std::vector<ConsumedOutcome> ConsumedStaleness(const std::vector<v1::Trial>& trials) {
  std::vector<ConsumedOutcome> out;
  for (const v1::Trial& t : trials) {
    if (t.use() != v1::OUTCOME_USE_CONSUMED || t.consumed_by() < 1) continue;
    out.push_back({t.consumed_by(), t.consumed_by() - 1 - t.generation()});
  }
  return out;
}

bool RanksBefore(const v1::Outcome& a, const v1::Outcome& b, const v1::Objective& objective) {
  const int ta = Tier(a), tb = Tier(b);
  if (ta != tb) return ta > tb;
  if (ta != 2) return false;
  if (a.has_grade() || b.has_grade()) {
    return GradeIndex(objective, a.grade()) > GradeIndex(objective, b.grade());
  }
  return objective.direction() == v1::DIRECTION_HIGHER_IS_BETTER ? a.score() > b.score() : a.score() < b.score();
}

std::vector<v1::Trial> BestTrials(const std::vector<v1::Trial>& trials, const v1::Objective& objective,
                                  size_t count) {
  std::vector<v1::Trial> ranked;
  for (const v1::Trial& t : trials) {
    if (Tier(t.outcome()) > 0) ranked.push_back(t);
  }
  std::stable_sort(ranked.begin(), ranked.end(), [&](const v1::Trial& a, const v1::Trial& b) {
    if (RanksBefore(a.outcome(), b.outcome(), objective)) return true;
    if (RanksBefore(b.outcome(), a.outcome(), objective)) return false;
    return a.number() < b.number();
  });
  if (ranked.size() > count) ranked.resize(count);
  return ranked;
}

std::vector<int64_t> RestartGenerations(const std::vector<v1::GenerationView>& generations) {
  std::vector<int64_t> out;
  for (size_t i = 1; i < generations.size(); ++i) {
    if (generations[i].epoch() > generations[i - 1].epoch()) out.push_back(generations[i].generation());
  }
  return out;
}

}  // namespace ogive::cli
