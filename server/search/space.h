// Space: a validated search space, and the map between candidates (values in the user's units) and the
// internal coordinates the search distributions work in.
//
// Internal coordinates, one per parameter:
//   real      u in [0, 1], affine in the value (or in ln(value) when the parameter is on a log scale);
//   integer   u in [0, 1], the range [low - 1/2, high + 1/2] mapped affinely, so integer k owns the cell
//             [(k - low) / W, (k - low + 1) / W) with W = high - low + 1 and decodes by rounding;
//   flag      0 or 1;
//   categorical  the option's index 0..K-1.
// Real and integer coordinates form the Gaussian block; flags and categoricals the discrete blocks.
//
// Bounds are hard. A Gaussian sample may leave [0, 1]; Repair() folds it back by reflection at the
// bounds (x -> -x below 0, x -> 2 - x above 1, repeated, i.e. the periodic mirror), and Decode() clamps
// whatever rounding leaves, so every decoded candidate lies inside the declared bounds.
//
// A Space is immutable after Create() and safe to share between threads.
#ifndef OGIVE_SERVER_SEARCH_SPACE_H_
#define OGIVE_SERVER_SEARCH_SPACE_H_

#include <cstdint>
#include <string>
#include <utility>
#include <variant>
#include <vector>

#include "Eigen/Core"
#include "absl/status/statusor.h"
#include "absl/types/span.h"

namespace ogive::search {

enum class ParameterKind { kReal, kInteger, kCategorical, kFlag };

// One parameter as the design declares it. Fields that do not belong to `kind` are ignored.
struct ParameterSpec {
  std::string name;
  ParameterKind kind = ParameterKind::kReal;
  double low = 0.0;   // kReal: inclusive bounds in the user's unit
  double high = 0.0;
  bool log = false;   // kReal: search on ln(value)
  int64_t integer_low = 0;  // kInteger: inclusive bounds
  int64_t integer_high = 0;
  std::vector<std::string> options;  // kCategorical

  static ParameterSpec Real(std::string name, double low, double high, bool log = false) {
    ParameterSpec p;
    p.name = std::move(name);
    p.kind = ParameterKind::kReal;
    p.low = low;
    p.high = high;
    p.log = log;
    return p;
  }
  static ParameterSpec Integer(std::string name, int64_t low, int64_t high) {
    ParameterSpec p;
    p.name = std::move(name);
    p.kind = ParameterKind::kInteger;
    p.integer_low = low;
    p.integer_high = high;
    return p;
  }
  static ParameterSpec Flag(std::string name) {
    ParameterSpec p;
    p.name = std::move(name);
    p.kind = ParameterKind::kFlag;
    return p;
  }
  static ParameterSpec Categorical(std::string name, std::vector<std::string> options) {
    ParameterSpec p;
    p.name = std::move(name);
    p.kind = ParameterKind::kCategorical;
    p.options = std::move(options);
    return p;
  }
};

// A value of one parameter: real, integer, categorical option name, or flag.
using Value = std::variant<double, int64_t, std::string, bool>;

// A candidate: one value per parameter, in the space's parameter order.
using Candidate = std::vector<Value>;

class Space {
 public:
  // Validates the parameters: names non-empty and unique; real: finite low < high, log needs low > 0;
  // integer: low < high and at most 2^31 values; categorical: at least two distinct non-empty options;
  // at least one parameter. Errors are INVALID_ARGUMENT and name the parameter and the rule.
  static absl::StatusOr<Space> Create(std::vector<ParameterSpec> parameters);

  int size() const { return static_cast<int>(parameters_.size()); }
  const std::vector<ParameterSpec>& parameters() const { return parameters_; }
  const ParameterSpec& parameter(int i) const { return parameters_[i]; }

  // Positions of the parameters in each block, in parameter order.
  const std::vector<int>& gaussian_indices() const { return gaussian_indices_; }
  const std::vector<int>& flag_indices() const { return flag_indices_; }
  const std::vector<int>& categorical_indices() const { return categorical_indices_; }

  // Number of integer values of parameter i (W above), or 0 for a real parameter.
  int64_t integer_levels(int i) const;

  // Internal coordinates of a candidate. INVALID_ARGUMENT if a value has the wrong kind, lies outside
  // its bounds, or names an unknown option.
  absl::StatusOr<Eigen::VectorXd> Encode(const Candidate& candidate) const;
  // The internal coordinate of one value of parameter i; errors as for Encode().
  absl::StatusOr<double> EncodeValue(int i, const Value& value) const;

  // Folds the Gaussian coordinates of `internal` back into [0, 1] by reflection; leaves the discrete
  // coordinates as they are. Points already inside are returned unchanged.
  Eigen::VectorXd Repair(const Eigen::VectorXd& internal) const;

  // The candidate for internal coordinates. Never leaves the bounds: Gaussian coordinates are repaired
  // first and the decoded value is clamped; flags decode as x >= 1/2; categorical indices are clamped.
  // REQUIRES: internal.size() == size() and every coordinate is finite.
  Candidate Decode(const Eigen::VectorXd& internal) const;

  // The middle of every range (reals, integers), 1/2 for flags and 0 for categoricals: the default
  // start point.
  Eigen::VectorXd Center() const;

 private:
  explicit Space(std::vector<ParameterSpec> parameters);

  std::vector<ParameterSpec> parameters_;
  std::vector<int> gaussian_indices_;
  std::vector<int> flag_indices_;
  std::vector<int> categorical_indices_;
};

// Human-readable name of a kind: "real", "integer", "categorical", "flag".
const char* KindName(ParameterKind kind);

}  // namespace ogive::search

#endif  // OGIVE_SERVER_SEARCH_SPACE_H_
