#include "server/codec/marginal_codec.h"

#include <cmath>
#include <cstddef>
#include <utility>

#include "absl/strings/str_cat.h"

namespace ogive::codec {
namespace {

// Internal coordinate u in [0, 1] of a real parameter to its value, and a spread s in internal
// units to the unit:
//   linear:  x = low + u (high - low),           spread = s (high - low)
//   log:     x = exp(ln low + u (ln high - ln low)),
//            spread = exp(ln x + s span) - x = x (exp(s span) - 1)
// Integers use the grid's cell width w = high - low + 1 and the half-cell margin at either end:
//   x = low - 1/2 + u w,                         spread = s w
void SetRealOrInteger(const search::ParameterSpec& p, double u, double s, v1::Marginal* m) {
  if (p.kind == search::ParameterKind::kInteger) {
    const double w = static_cast<double>(p.integer_high - p.integer_low + 1);
    m->set_low(static_cast<double>(p.integer_low));
    m->set_high(static_cast<double>(p.integer_high));
    m->set_mean(static_cast<double>(p.integer_low) - 0.5 + u * w);
    m->set_spread(s * w);
    return;
  }
  m->set_low(p.low);
  m->set_high(p.high);
  if (p.log) {
    const double span = std::log(p.high) - std::log(p.low);
    const double mean = std::exp(std::log(p.low) + u * span);
    m->set_mean(mean);
    m->set_spread(mean * std::expm1(s * span));
  } else {
    m->set_mean(p.low + u * (p.high - p.low));
    m->set_spread(s * (p.high - p.low));
  }
}

}  // namespace

std::vector<v1::Marginal> MarginalsToProto(const search::DistributionSummary& summary, const search::Space& space,
                                           const v1::CampaignDesign& design) {
  std::vector<v1::Marginal> out;
  out.reserve(space.size());
  int gaussian_k = 0, flag_k = 0, categorical_k = 0;
  for (int i = 0; i < space.size(); ++i) {
    const search::ParameterSpec& p = space.parameter(i);
    v1::Marginal& m = out.emplace_back();
    m.set_parameter(p.name);
    m.set_unit(design.parameters(i).unit());
    switch (p.kind) {
      case search::ParameterKind::kReal:
      case search::ParameterKind::kInteger:
        SetRealOrInteger(p, summary.gaussian->mean[gaussian_k], summary.gaussian->spread[gaussian_k], &m);
        ++gaussian_k;
        break;
      case search::ParameterKind::kFlag:
        m.add_probabilities(summary.flag_probabilities[flag_k++]);
        break;
      case search::ParameterKind::kCategorical: {
        const Eigen::VectorXd& theta = summary.option_probabilities[categorical_k++];
        for (size_t k = 0; k < p.options.size(); ++k) {
          m.add_options(p.options[k]);
          m.add_probabilities(theta[static_cast<int>(k)]);
        }
        break;
      }
    }
  }
  return out;
}

absl::Status CheckGenerationFits(const v1::GenerationSummary& g, const search::Space& space) {
  const auto mismatch = [&](absl::string_view field, int expected, int got) {
    return absl::DataLossError(absl::StrCat("generation ", g.generation(), ": stored summary has ", got, " ",
                                            field, ", the campaign's parameters need ", expected));
  };
  const int n = static_cast<int>(space.gaussian_indices().size());
  if (n > 0 && g.mean_size() != n) return mismatch("means", n, g.mean_size());
  if (n > 0 && g.spread_size() != n) return mismatch("spreads", n, g.spread_size());
  const int flags = static_cast<int>(space.flag_indices().size());
  if (g.flag_probabilities_size() != flags) return mismatch("flag probabilities", flags, g.flag_probabilities_size());
  int options = 0;
  for (int i : space.categorical_indices()) options += static_cast<int>(space.parameter(i).options.size());
  if (g.option_probabilities_size() != options) {
    return mismatch("option probabilities", options, g.option_probabilities_size());
  }
  return absl::OkStatus();
}

search::DistributionSummary SummaryFromGeneration(const v1::GenerationSummary& g, const search::Space& space) {
  search::DistributionSummary summary;
  const int n = static_cast<int>(space.gaussian_indices().size());
  if (n > 0) {
    search::GaussianSummary gs;
    gs.mean = Eigen::Map<const Eigen::VectorXd>(g.mean().data(), n);
    gs.spread = Eigen::Map<const Eigen::VectorXd>(g.spread().data(), n);
    gs.sigma = g.sigma();
    gs.axis_ratio = g.axis_ratio();
    summary.gaussian = std::move(gs);
  }
  summary.flag_probabilities =
      Eigen::Map<const Eigen::VectorXd>(g.flag_probabilities().data(), g.flag_probabilities_size());
  int offset = 0;
  for (int i : space.categorical_indices()) {
    const int k = static_cast<int>(space.parameter(i).options.size());
    summary.option_probabilities.push_back(
        Eigen::Map<const Eigen::VectorXd>(g.option_probabilities().data() + offset, k));
    offset += k;
  }
  return summary;
}

absl::StatusOr<v1::GenerationView> GenerationViewFromSummary(const v1::GenerationSummary& g,
                                                             const search::Space& space,
                                                             const v1::CampaignDesign& design) {
  if (absl::Status s = CheckGenerationFits(g, space); !s.ok()) return s;
  const search::DistributionSummary summary = SummaryFromGeneration(g, space);
  v1::GenerationView view;
  view.set_generation(g.generation());
  view.set_epoch(g.epoch());
  view.set_population_size(g.population_size());
  view.set_cohort_size(g.cohort_size());
  view.set_mean_staleness(g.mean_staleness());
  view.set_max_staleness(g.max_staleness());
  if (summary.gaussian) {
    view.set_step_size(g.sigma());
    view.set_axis_ratio(g.axis_ratio());
  }
  for (v1::Marginal& m : MarginalsToProto(summary, space, design)) *view.add_marginals() = std::move(m);
  view.set_best_trial(g.best_trial());
  view.set_recorded_at_unix_ms(g.recorded_at_ns() / 1000000);
  return view;
}

}  // namespace ogive::codec
