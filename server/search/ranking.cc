#include "server/search/ranking.h"

#include <algorithm>
#include <cmath>
#include <numeric>

#include "absl/status/status.h"
#include "absl/strings/str_cat.h"
#include "server/base/check.h"

namespace ogive::search {
namespace {

// Position on one line where larger is better: infeasible first, then scores or grades.
// Returns {class, value}: class 0 = infeasible, 1 = scored or graded.
std::pair<int, double> Merit(const Outcome& o, const OutcomeOrder& order) {
  switch (o.kind) {
    case Outcome::Kind::kInfeasible:
      return {0, 0.0};
    case Outcome::Kind::kGrade:
      return {1, static_cast<double>(o.grade)};
    case Outcome::Kind::kScore:
      return {1, order.direction == Direction::kLowerIsBetter ? -o.score : o.score};
    case Outcome::Kind::kVoid:
      break;
  }
  OGIVE_CHECK(false && "void outcomes are never ranked");
  return {0, 0.0};
}

}  // namespace

absl::Status CheckOutcome(const Outcome& outcome, const OutcomeOrder& order) {
  switch (outcome.kind) {
    case Outcome::Kind::kScore:
      if (order.graded) {
        return absl::InvalidArgumentError("outcome: this campaign is graded; report a grade, not a score");
      }
      if (!std::isfinite(outcome.score)) {
        return absl::InvalidArgumentError(
            absl::StrCat("outcome.score: must be a finite number, got ", outcome.score));
      }
      return absl::OkStatus();
    case Outcome::Kind::kGrade:
      if (!order.graded) {
        return absl::InvalidArgumentError("outcome: this campaign takes scores; report a score, not a grade");
      }
      if (outcome.grade < 0 || outcome.grade >= order.grade_count) {
        return absl::InvalidArgumentError(absl::StrCat("outcome.grade: index ", outcome.grade,
                                                       " is outside the scale 0..", order.grade_count - 1));
      }
      return absl::OkStatus();
    case Outcome::Kind::kInfeasible:
    case Outcome::Kind::kVoid:
      return absl::OkStatus();
  }
  return absl::InvalidArgumentError("outcome: unknown kind");
}

int CompareOutcomes(const Outcome& a, const Outcome& b, const OutcomeOrder& order) {
  const auto ma = Merit(a, order);
  const auto mb = Merit(b, order);
  if (ma > mb) return -1;
  if (ma < mb) return 1;
  return 0;
}

absl::StatusOr<std::vector<TieSpan>> RankCohort(absl::Span<const Outcome> cohort, const OutcomeOrder& order) {
  const int n = static_cast<int>(cohort.size());
  for (int i = 0; i < n; ++i) {
    if (!cohort[i].informative()) {
      return absl::InvalidArgumentError(absl::StrCat("cohort[", i, "]: void outcomes cannot be ranked"));
    }
    if (absl::Status s = CheckOutcome(cohort[i], order); !s.ok()) return s;
  }
  // Sort indices best first, then sweep groups of equal outcomes.
  std::vector<int> by_rank(n);
  std::iota(by_rank.begin(), by_rank.end(), 0);
  std::stable_sort(by_rank.begin(), by_rank.end(),
                   [&](int i, int j) { return CompareOutcomes(cohort[i], cohort[j], order) < 0; });
  std::vector<TieSpan> spans(n);
  for (int start = 0; start < n;) {
    int end = start + 1;
    while (end < n && CompareOutcomes(cohort[by_rank[start]], cohort[by_rank[end]], order) == 0) ++end;
    for (int k = start; k < end; ++k) spans[by_rank[k]] = TieSpan{start, end};
    start = end;
  }
  return spans;
}

std::vector<double> TieAveragedWeights(absl::Span<const TieSpan> spans, absl::Span<const double> rank_weights) {
  std::vector<double> weights;
  weights.reserve(spans.size());
  for (const TieSpan& span : spans) {
    OGIVE_CHECK(0 <= span.better && span.better < span.better_or_equal &&
                span.better_or_equal <= static_cast<int>(rank_weights.size()));
    double sum = 0.0;
    for (int k = span.better; k < span.better_or_equal; ++k) sum += rank_weights[k];
    weights.push_back(sum / (span.better_or_equal - span.better));
  }
  return weights;
}

std::vector<double> TruncationQuantileWeights(int n) {
  OGIVE_CHECK(n > 0);
  std::vector<double> w(n);
  for (int k = 0; k < n; ++k) {
    const double q = (k + 0.5) / n;
    w[k] = (q <= 0.5 ? 2.0 : 0.0) / n;
  }
  return w;
}

std::vector<double> LogQuantileWeights(int n) {
  OGIVE_CHECK(n > 0);
  std::vector<double> w(n);
  for (int k = 0; k < n; ++k) {
    const double q = (k + 0.5) / n;
    w[k] = q < 0.5 ? -2.0 * std::log(2.0 * q) / n : 0.0;
  }
  return w;
}

}  // namespace ogive::search
