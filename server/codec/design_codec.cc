#include "server/codec/design_codec.h"

#include <cmath>
#include <string>

#include "absl/container/flat_hash_set.h"
#include "absl/status/status.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_join.h"

namespace ogive::codec {
namespace {

std::string ParameterField(int index, const v1::Parameter& p) {
  return absl::StrCat("parameters[", index, "] '", p.name(), "'");
}

// A start value for one parameter, checked against its kind and bounds by Space::Encode later.
absl::StatusOr<search::Value> ValueFromProto(const v1::Value& value, const search::ParameterSpec& p) {
  switch (value.kind_case()) {
    case v1::Value::kReal:
      if (p.kind != search::ParameterKind::kReal) break;
      return search::Value(value.real());
    case v1::Value::kInteger:
      if (p.kind != search::ParameterKind::kInteger) break;
      return search::Value(value.integer());
    case v1::Value::kCategorical:
      if (p.kind != search::ParameterKind::kCategorical) break;
      return search::Value(value.categorical());
    case v1::Value::kFlag:
      if (p.kind != search::ParameterKind::kFlag) break;
      return search::Value(value.flag());
    case v1::Value::KIND_NOT_SET:
      return absl::InvalidArgumentError(absl::StrCat("value of '", p.name, "': no value set"));
  }
  return absl::InvalidArgumentError(
      absl::StrCat("value of '", p.name, "': expected a ", search::KindName(p.kind), " value"));
}

}  // namespace

absl::StatusOr<search::Space> SpaceFromDesign(const v1::CampaignDesign& design) {
  std::vector<search::ParameterSpec> specs;
  for (int i = 0; i < design.parameters_size(); ++i) {
    const v1::Parameter& p = design.parameters(i);
    search::ParameterSpec spec;
    spec.name = p.name();
    switch (p.kind_case()) {
      case v1::Parameter::kReal:
        spec.kind = search::ParameterKind::kReal;
        spec.low = p.real().low();
        spec.high = p.real().high();
        spec.log = p.real().log();
        break;
      case v1::Parameter::kInteger:
        spec.kind = search::ParameterKind::kInteger;
        spec.integer_low = p.integer().low();
        spec.integer_high = p.integer().high();
        break;
      case v1::Parameter::kCategorical:
        spec.kind = search::ParameterKind::kCategorical;
        spec.options.assign(p.categorical().options().begin(), p.categorical().options().end());
        break;
      case v1::Parameter::kFlag:
        spec.kind = search::ParameterKind::kFlag;
        break;
      case v1::Parameter::KIND_NOT_SET:
        return absl::InvalidArgumentError(absl::StrCat(
            ParameterField(i, p), ": kind must be set to one of real, integer, categorical, flag"));
    }
    specs.push_back(std::move(spec));
  }
  return search::Space::Create(std::move(specs));
}

absl::StatusOr<search::OutcomeOrder> OrderFromObjective(const v1::Objective& objective) {
  search::OutcomeOrder order;
  switch (objective.order_case()) {
    case v1::Objective::kDirection:
      switch (objective.direction()) {
        case v1::DIRECTION_LOWER_IS_BETTER:
          order.direction = search::Direction::kLowerIsBetter;
          return order;
        case v1::DIRECTION_HIGHER_IS_BETTER:
          order.direction = search::Direction::kHigherIsBetter;
          return order;
        default:
          return absl::InvalidArgumentError(absl::StrCat("objective.direction: must be DIRECTION_LOWER_IS_BETTER or "
                                                         "DIRECTION_HIGHER_IS_BETTER, got ",
                                                         static_cast<int>(objective.direction())));
      }
    case v1::Objective::kGradeScale: {
      const auto& labels = objective.grade_scale().labels();
      if (labels.size() < 2) {
        return absl::InvalidArgumentError(absl::StrCat(
            "objective.grade_scale.labels: needs at least two labels (worst first), got ", labels.size()));
      }
      absl::flat_hash_set<std::string> seen;
      for (const std::string& label : labels) {
        if (label.empty()) return absl::InvalidArgumentError("objective.grade_scale.labels: labels must be non-empty");
        if (!seen.insert(label).second) {
          return absl::InvalidArgumentError(
              absl::StrCat("objective.grade_scale.labels: '", label, "' appears twice; labels must be distinct"));
        }
      }
      order.graded = true;
      order.grade_count = labels.size();
      return order;
    }
    case v1::Objective::ORDER_NOT_SET:
      break;
  }
  return absl::InvalidArgumentError(
      "objective: set either direction (DIRECTION_LOWER_IS_BETTER or DIRECTION_HIGHER_IS_BETTER) or grade_scale");
}

absl::StatusOr<search::DistributionOptions> DistributionOptionsFromDesign(const v1::CampaignDesign& design,
                                                                         const search::Space& space) {
  search::DistributionOptions options;
  if (design.population_size() < 0 || design.population_size() == 1) {
    return absl::InvalidArgumentError(
        absl::StrCat("population_size: must be 0 (default) or at least 2, got ", design.population_size()));
  }
  if (design.expected_workers() < 0) {
    return absl::InvalidArgumentError(
        absl::StrCat("expected_workers: must be 0 (meaning 1) or positive, got ", design.expected_workers()));
  }
  options.population_size = design.population_size();
  options.expected_workers = std::max(1, design.expected_workers());
  if (!std::isfinite(design.initial_spread()) || design.initial_spread() < 0 || design.initial_spread() > 1) {
    return absl::InvalidArgumentError(absl::StrCat(
        "initial_spread: must be 0 (default) or in (0, 1], a fraction of each range; got ", design.initial_spread()));
  }
  options.initial_spread = design.initial_spread();
  switch (design.gaussian_model()) {
    case v1::GAUSSIAN_MODEL_UNSPECIFIED:
      options.gaussian_model = search::GaussianModel::kAuto;
      break;
    case v1::GAUSSIAN_MODEL_FULL:
      options.gaussian_model = search::GaussianModel::kFull;
      break;
    case v1::GAUSSIAN_MODEL_DIAGONAL:
      options.gaussian_model = search::GaussianModel::kDiagonal;
      break;
    default:
      return absl::InvalidArgumentError(absl::StrCat(
          "gaussian_model: must be GAUSSIAN_MODEL_UNSPECIFIED, GAUSSIAN_MODEL_FULL or GAUSSIAN_MODEL_DIAGONAL, got ",
          static_cast<int>(design.gaussian_model())));
  }
  if (design.has_start() && design.start().values_size() > 0) {
    // A partial start point: given values are used, the others take the middle of their range.
    options.start.assign(space.size(), std::nullopt);
    for (const auto& [name, value] : design.start().values()) {
      int index = -1;
      for (int i = 0; i < space.size(); ++i) {
        if (space.parameter(i).name == name) index = i;
      }
      if (index < 0) return absl::InvalidArgumentError(absl::StrCat("start: unknown parameter '", name, "'"));
      absl::StatusOr<search::Value> v = ValueFromProto(value, space.parameter(index));
      if (!v.ok()) return absl::InvalidArgumentError(absl::StrCat("start: ", v.status().message()));
      absl::StatusOr<double> encoded = space.EncodeValue(index, *v);
      if (!encoded.ok()) return absl::InvalidArgumentError(absl::StrCat("start: ", encoded.status().message()));
      options.start[index] = *encoded;
    }
  }
  return options;
}

absl::StatusOr<search::Candidate> CandidateFromProto(const v1::Candidate& candidate, const search::Space& space) {
  search::Candidate values(space.size());
  for (const auto& [name, value] : candidate.values()) {
    bool known = false;
    for (int i = 0; i < space.size(); ++i) known = known || space.parameter(i).name == name;
    if (!known) return absl::InvalidArgumentError(absl::StrCat("candidate: unknown parameter '", name, "'"));
  }
  for (int i = 0; i < space.size(); ++i) {
    const search::ParameterSpec& p = space.parameter(i);
    const auto it = candidate.values().find(p.name);
    if (it == candidate.values().end()) {
      return absl::InvalidArgumentError(absl::StrCat("candidate: parameter '", p.name, "' is missing"));
    }
    absl::StatusOr<search::Value> v = ValueFromProto(it->second, p);
    if (!v.ok()) return absl::InvalidArgumentError(absl::StrCat("candidate: ", v.status().message()));
    values[i] = *std::move(v);
  }
  if (absl::StatusOr<Eigen::VectorXd> encoded = space.Encode(values); !encoded.ok()) {
    return absl::InvalidArgumentError(absl::StrCat("candidate: ", encoded.status().message()));
  }
  return values;
}

v1::Candidate CandidateToProto(const search::Candidate& candidate, const search::Space& space) {
  v1::Candidate out;
  for (int i = 0; i < space.size(); ++i) {
    v1::Value& v = (*out.mutable_values())[space.parameter(i).name];
    std::visit(
        [&v](const auto& x) {
          using T = std::decay_t<decltype(x)>;
          if constexpr (std::is_same_v<T, double>) v.set_real(x);
          if constexpr (std::is_same_v<T, int64_t>) v.set_integer(x);
          if constexpr (std::is_same_v<T, std::string>) v.set_categorical(x);
          if constexpr (std::is_same_v<T, bool>) v.set_flag(x);
        },
        candidate[i]);
  }
  return out;
}

absl::StatusOr<search::Outcome> OutcomeFromProto(const v1::Outcome& outcome, const v1::Objective& objective) {
  absl::StatusOr<search::OutcomeOrder> order = OrderFromObjective(objective);
  if (!order.ok()) return order.status();
  search::Outcome result;
  switch (outcome.kind_case()) {
    case v1::Outcome::kScore:
      result = search::Outcome::Score(outcome.score());
      break;
    case v1::Outcome::kGrade: {
      const auto& labels = objective.grade_scale().labels();
      int index = -1;
      for (int i = 0; i < labels.size(); ++i) {
        if (labels[i] == outcome.grade()) index = i;
      }
      if (!order->graded) {
        return absl::InvalidArgumentError("outcome.grade: this campaign takes scores; report a score, not a grade");
      }
      if (index < 0) {
        return absl::InvalidArgumentError(absl::StrCat("outcome.grade: '", outcome.grade(),
                                                       "' is not on the scale; allowed: ", absl::StrJoin(labels, ", ")));
      }
      result = search::Outcome::Grade(index);
      break;
    }
    case v1::Outcome::kInfeasible:
      result = search::Outcome::Infeasible();
      break;
    case v1::Outcome::kVoid:
      result = search::Outcome::Void();
      break;
    case v1::Outcome::KIND_NOT_SET:
      return absl::InvalidArgumentError("outcome: set one of score, grade, infeasible, void");
  }
  if (absl::Status s = search::CheckOutcome(result, *order); !s.ok()) return s;
  return result;
}

}  // namespace ogive::codec
