#include "server/search/rank_change.h"

#include <algorithm>
#include <cmath>
#include <numeric>

#include "server/base/check.h"

namespace ogive::search {
namespace {

// The θ·50-th percentile (nearest rank) of |k − R| for k = 1 .. N − 1.
double RankChangeLimit(double rank, int n, double theta) {
  std::vector<double> changes;
  changes.reserve(static_cast<size_t>(n - 1));
  for (int k = 1; k <= n - 1; ++k) changes.push_back(std::abs(k - rank));
  std::sort(changes.begin(), changes.end());
  const double p = theta * 50.0 / 100.0;
  const int index = std::clamp(static_cast<int>(std::ceil(p * changes.size())) - 1, 0,
                               static_cast<int>(changes.size()) - 1);
  return changes[static_cast<size_t>(index)];
}

double Sign(double v) { return (v > 0) - (v < 0); }

}  // namespace

std::vector<double> JointRanks(absl::Span<const Outcome> values, const OutcomeOrder& order) {
  const int n = static_cast<int>(values.size());
  std::vector<int> by_order(static_cast<size_t>(n));
  std::iota(by_order.begin(), by_order.end(), 0);
  std::stable_sort(by_order.begin(), by_order.end(),
                   [&](int a, int b) { return CompareOutcomes(values[a], values[b], order) < 0; });
  std::vector<double> ranks(static_cast<size_t>(n));
  for (int start = 0; start < n;) {
    int end = start + 1;
    while (end < n && CompareOutcomes(values[by_order[start]], values[by_order[end]], order) == 0) ++end;
    const double shared = (start + 1 + end) / 2.0;  // the average of ranks start+1 .. end
    for (int k = start; k < end; ++k) ranks[static_cast<size_t>(by_order[k])] = shared;
    start = end;
  }
  return ranks;
}

double RankChangeMeasure(absl::Span<const Outcome> firsts, absl::Span<const Remeasurement> repeats,
                         const OutcomeOrder& order, double theta) {
  OGIVE_CHECK(!repeats.empty());
  std::vector<Outcome> all(firsts.begin(), firsts.end());
  for (const Remeasurement& r : repeats) {
    OGIVE_CHECK(r.member >= 0 && r.member < static_cast<int>(firsts.size()));
    all.push_back(r.repeat);
  }
  const int n = static_cast<int>(all.size());
  const std::vector<double> rank = JointRanks(all, order);
  double s = 0;
  for (size_t i = 0; i < repeats.size(); ++i) {
    const Outcome& old_value = firsts[static_cast<size_t>(repeats[i].member)];
    const double r_old = rank[static_cast<size_t>(repeats[i].member)];
    const double r_new = rank[firsts.size() + i];
    const double delta = r_new - r_old - Sign(r_new - r_old);
    const int new_worse = CompareOutcomes(repeats[i].repeat, old_value, order) > 0;
    const int old_worse = CompareOutcomes(old_value, repeats[i].repeat, order) > 0;
    s += 2 * std::abs(delta) - RankChangeLimit(r_new - new_worse, n, theta) -
         RankChangeLimit(r_old - old_worse, n, theta);
  }
  return s / static_cast<double>(repeats.size());
}

}  // namespace ogive::search
