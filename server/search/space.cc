#include "server/search/space.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <utility>

#include "absl/container/flat_hash_set.h"
#include "absl/status/status.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_join.h"
#include "server/base/check.h"

namespace ogive::search {
namespace {

// Integer ranges are limited so that W = high - low + 1 is exact in a double and cells stay wide.
constexpr int64_t kMaxIntegerLevels = int64_t{1} << 31;

absl::Status ParameterError(const ParameterSpec& p, absl::string_view rule) {
  return absl::InvalidArgumentError(absl::StrCat("parameter '", p.name, "' (", KindName(p.kind), "): ", rule));
}

absl::Status ValidateParameter(const ParameterSpec& p) {
  switch (p.kind) {
    case ParameterKind::kReal:
      if (!std::isfinite(p.low) || !std::isfinite(p.high)) {
        return ParameterError(p, absl::StrCat("low and high must be finite, got low=", p.low, " high=", p.high));
      }
      if (!(p.low < p.high)) {
        return ParameterError(p, absl::StrCat("low must be < high, got low=", p.low, " high=", p.high));
      }
      if (!std::isfinite(p.high - p.low)) {
        return ParameterError(p, absl::StrCat("high - low must be a finite number, got low=", p.low, " high=", p.high));
      }
      if (p.log && !(p.low > 0.0)) {
        return ParameterError(p, absl::StrCat("a log scale needs low > 0, got low=", p.low));
      }
      return absl::OkStatus();
    case ParameterKind::kInteger:
      if (!(p.integer_low < p.integer_high)) {
        return ParameterError(
            p, absl::StrCat("low must be < high, got low=", p.integer_low, " high=", p.integer_high));
      }
      // high - low computed in unsigned arithmetic cannot overflow.
      if (static_cast<uint64_t>(p.integer_high) - static_cast<uint64_t>(p.integer_low) >=
          static_cast<uint64_t>(kMaxIntegerLevels)) {
        return ParameterError(p, absl::StrCat("at most ", kMaxIntegerLevels, " values are allowed"));
      }
      return absl::OkStatus();
    case ParameterKind::kCategorical: {
      if (p.options.size() < 2) {
        return ParameterError(p, absl::StrCat("needs at least two options, got ", p.options.size()));
      }
      absl::flat_hash_set<std::string> seen;
      for (const std::string& option : p.options) {
        if (option.empty()) return ParameterError(p, "options must be non-empty");
        if (!seen.insert(option).second) {
          return ParameterError(p, absl::StrCat("option '", option, "' appears twice; options must be distinct"));
        }
      }
      return absl::OkStatus();
    }
    case ParameterKind::kFlag:
      return absl::OkStatus();
  }
  return ParameterError(p, "unknown kind");
}

// The periodic mirror into [0, 1]: reflection at 0 and 1, repeated.
double Reflect(double x) {
  if (x >= 0.0 && x <= 1.0) return x;
  const double t = x - 2.0 * std::floor(x / 2.0);  // in [0, 2)
  return std::clamp(t <= 1.0 ? t : 2.0 - t, 0.0, 1.0);
}

}  // namespace

const char* KindName(ParameterKind kind) {
  switch (kind) {
    case ParameterKind::kReal:
      return "real";
    case ParameterKind::kInteger:
      return "integer";
    case ParameterKind::kCategorical:
      return "categorical";
    case ParameterKind::kFlag:
      return "flag";
  }
  return "unknown";
}

absl::StatusOr<Space> Space::Create(std::vector<ParameterSpec> parameters) {
  if (parameters.empty()) {
    return absl::InvalidArgumentError("parameters: a campaign needs at least one parameter");
  }
  absl::flat_hash_set<std::string> names;
  for (const ParameterSpec& p : parameters) {
    if (p.name.empty()) return absl::InvalidArgumentError("parameters: every parameter needs a name");
    if (!names.insert(p.name).second) {
      return absl::InvalidArgumentError(
          absl::StrCat("parameter '", p.name, "': the name appears twice; names must be unique"));
    }
    if (absl::Status s = ValidateParameter(p); !s.ok()) return s;
  }
  return Space(std::move(parameters));
}

Space::Space(std::vector<ParameterSpec> parameters) : parameters_(std::move(parameters)) {
  for (int i = 0; i < size(); ++i) {
    switch (parameters_[i].kind) {
      case ParameterKind::kReal:
      case ParameterKind::kInteger:
        gaussian_indices_.push_back(i);
        break;
      case ParameterKind::kFlag:
        flag_indices_.push_back(i);
        break;
      case ParameterKind::kCategorical:
        categorical_indices_.push_back(i);
        break;
    }
  }
}

int64_t Space::integer_levels(int i) const {
  const ParameterSpec& p = parameters_[i];
  return p.kind == ParameterKind::kInteger ? p.integer_high - p.integer_low + 1 : 0;
}

absl::StatusOr<Eigen::VectorXd> Space::Encode(const Candidate& candidate) const {
  if (static_cast<int>(candidate.size()) != size()) {
    return absl::InvalidArgumentError(
        absl::StrCat("candidate: has ", candidate.size(), " values, the space has ", size(), " parameters"));
  }
  Eigen::VectorXd u(size());
  for (int i = 0; i < size(); ++i) {
    absl::StatusOr<double> coordinate = EncodeValue(i, candidate[i]);
    if (!coordinate.ok()) return coordinate.status();
    u[i] = *coordinate;
  }
  return u;
}

absl::StatusOr<double> Space::EncodeValue(int i, const Value& v) const {
  OGIVE_CHECK(i >= 0 && i < size());
  const ParameterSpec& p = parameters_[i];
  auto wrong_kind = [&] {
    return ParameterError(p, absl::StrCat("value has the wrong kind; expected a ", KindName(p.kind), " value"));
  };
  switch (p.kind) {
    case ParameterKind::kReal: {
      if (!std::holds_alternative<double>(v)) return wrong_kind();
      const double x = std::get<double>(v);
      if (!(x >= p.low && x <= p.high)) {
        return ParameterError(p, absl::StrCat("value ", x, " is outside [", p.low, ", ", p.high, "]"));
      }
      return p.log ? (std::log(x) - std::log(p.low)) / (std::log(p.high) - std::log(p.low))
                   : (x - p.low) / (p.high - p.low);
    }
    case ParameterKind::kInteger: {
      if (!std::holds_alternative<int64_t>(v)) return wrong_kind();
      const int64_t k = std::get<int64_t>(v);
      if (k < p.integer_low || k > p.integer_high) {
        return ParameterError(
            p, absl::StrCat("value ", k, " is outside [", p.integer_low, ", ", p.integer_high, "]"));
      }
      return (static_cast<double>(k - p.integer_low) + 0.5) / static_cast<double>(integer_levels(i));
    }
    case ParameterKind::kFlag:
      if (!std::holds_alternative<bool>(v)) return wrong_kind();
      return std::get<bool>(v) ? 1.0 : 0.0;
    case ParameterKind::kCategorical: {
      if (!std::holds_alternative<std::string>(v)) return wrong_kind();
      const auto it = std::find(p.options.begin(), p.options.end(), std::get<std::string>(v));
      if (it == p.options.end()) {
        return ParameterError(p, absl::StrCat("unknown option '", std::get<std::string>(v),
                                              "'; allowed: ", absl::StrJoin(p.options, ", ")));
      }
      return static_cast<double>(it - p.options.begin());
    }
  }
  return ParameterError(p, "unknown kind");
}

Eigen::VectorXd Space::Repair(const Eigen::VectorXd& internal) const {
  OGIVE_CHECK(internal.size() == size());
  Eigen::VectorXd repaired = internal;
  for (int i : gaussian_indices_) repaired[i] = Reflect(internal[i]);
  return repaired;
}

Candidate Space::Decode(const Eigen::VectorXd& internal) const {
  OGIVE_CHECK(internal.size() == size());
  Candidate candidate(size());
  for (int i = 0; i < size(); ++i) {
    const ParameterSpec& p = parameters_[i];
    OGIVE_CHECK(std::isfinite(internal[i]));
    switch (p.kind) {
      case ParameterKind::kReal: {
        const double u = Reflect(internal[i]);
        const double x = p.log ? std::exp(std::log(p.low) + u * (std::log(p.high) - std::log(p.low)))
                               : p.low + u * (p.high - p.low);
        candidate[i] = std::clamp(x, p.low, p.high);
        break;
      }
      case ParameterKind::kInteger: {
        const double u = Reflect(internal[i]);
        const int64_t levels = integer_levels(i);
        const int64_t cell = std::min<int64_t>(static_cast<int64_t>(std::floor(u * static_cast<double>(levels))),
                                               levels - 1);
        candidate[i] = p.integer_low + std::max<int64_t>(cell, 0);
        break;
      }
      case ParameterKind::kFlag:
        candidate[i] = internal[i] >= 0.5;
        break;
      case ParameterKind::kCategorical: {
        const int last = static_cast<int>(p.options.size()) - 1;
        const int index = static_cast<int>(std::lround(std::clamp(internal[i], 0.0, static_cast<double>(last))));
        candidate[i] = p.options[index];
        break;
      }
    }
  }
  return candidate;
}

Eigen::VectorXd Space::Center() const {
  Eigen::VectorXd center(size());
  for (int i = 0; i < size(); ++i) {
    switch (parameters_[i].kind) {
      case ParameterKind::kReal:
      case ParameterKind::kInteger:
      case ParameterKind::kFlag:
        center[i] = 0.5;
        break;
      case ParameterKind::kCategorical:
        center[i] = 0.0;
        break;
    }
  }
  return center;
}

}  // namespace ogive::search
