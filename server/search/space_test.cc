// Tests of the search space: validation, the encoding into internal coordinates, repair and the
// hard bounds of decoded candidates.
#include "server/search/space.h"

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <limits>
#include <string>
#include <utility>
#include <vector>

#include "absl/status/status.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "server/search/random_stream.h"

namespace ogive::search {
namespace {

using ::testing::AllOf;
using ::testing::HasSubstr;

ParameterSpec Real(std::string name, double low, double high, bool log = false) {
  ParameterSpec p;
  p.name = std::move(name);
  p.kind = ParameterKind::kReal;
  p.low = low;
  p.high = high;
  p.log = log;
  return p;
}

ParameterSpec Integer(std::string name, int64_t low, int64_t high) {
  ParameterSpec p;
  p.name = std::move(name);
  p.kind = ParameterKind::kInteger;
  p.integer_low = low;
  p.integer_high = high;
  return p;
}

ParameterSpec Categorical(std::string name, std::vector<std::string> options) {
  ParameterSpec p;
  p.name = std::move(name);
  p.kind = ParameterKind::kCategorical;
  p.options = std::move(options);
  return p;
}

ParameterSpec Flag(std::string name) {
  ParameterSpec p;
  p.name = std::move(name);
  p.kind = ParameterKind::kFlag;
  return p;
}

Space MakeSpace(std::vector<ParameterSpec> parameters) {
  absl::StatusOr<Space> space = Space::Create(std::move(parameters));
  EXPECT_TRUE(space.ok()) << space.status();
  return *std::move(space);
}

// Expects Create to fail with INVALID_ARGUMENT and a message containing every fragment.
void ExpectInvalid(std::vector<ParameterSpec> parameters,
                   const std::vector<std::string>& fragments) {
  absl::StatusOr<Space> space = Space::Create(std::move(parameters));
  ASSERT_FALSE(space.ok());
  EXPECT_EQ(space.status().code(), absl::StatusCode::kInvalidArgument);
  for (const std::string& fragment : fragments) {
    EXPECT_THAT(std::string(space.status().message()), HasSubstr(fragment));
  }
}

constexpr double kInf = std::numeric_limits<double>::infinity();
constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

TEST(SpaceValidationTest, RealLowMustBeBelowHigh) {
  ExpectInvalid({Real("rate", 2.0, 1.0)}, {"'rate'", "low", "high"});
  ExpectInvalid({Real("rate", 1.0, 1.0)}, {"'rate'", "low", "high"});
}

TEST(SpaceValidationTest, IntegerLowMustBeBelowHigh) {
  ExpectInvalid({Integer("layers", 5, 3)}, {"'layers'", "low", "high"});
  ExpectInvalid({Integer("layers", 4, 4)}, {"'layers'", "low", "high"});
}

TEST(SpaceValidationTest, LogScaleNeedsPositiveLow) {
  ExpectInvalid({Real("lr", 0.0, 1.0, /*log=*/true)}, {"'lr'", "log", "low > 0"});
  ExpectInvalid({Real("lr", -1.0, 1.0, /*log=*/true)}, {"'lr'", "log", "low > 0"});
}

TEST(SpaceValidationTest, BoundsMustBeFinite) {
  ExpectInvalid({Real("x", -kInf, 1.0)}, {"'x'", "finite"});
  ExpectInvalid({Real("x", 0.0, kInf)}, {"'x'", "finite"});
  ExpectInvalid({Real("x", kNaN, 1.0)}, {"'x'", "finite"});
  ExpectInvalid({Real("x", 0.0, kNaN)}, {"'x'", "finite"});
}

TEST(SpaceValidationTest, NamesMustBeUniqueAndNonEmpty) {
  ExpectInvalid({Real("x", 0, 1), Flag("x")}, {"'x'", "unique"});
  ExpectInvalid({Real("x", 0, 1), Real("", 0, 1)}, {"name"});
}

TEST(SpaceValidationTest, CategoricalNeedsTwoDistinctNonEmptyOptions) {
  ExpectInvalid({Categorical("color", {"red"})}, {"'color'", "two options"});
  ExpectInvalid({Categorical("color", {})}, {"'color'", "two options"});
  ExpectInvalid({Categorical("color", {"red", "blue", "red"})}, {"'color'", "'red'", "distinct"});
  ExpectInvalid({Categorical("color", {"red", ""})}, {"'color'", "non-empty"});
}

TEST(SpaceValidationTest, NeedsAtLeastOneParameter) {
  ExpectInvalid({}, {"parameters", "at least one"});
}

TEST(SpaceValidationTest, IntegerRangeIsLimited) {
  // 2^31 values are allowed, 2^31 + 1 are not (the header's rule).
  EXPECT_TRUE(Space::Create({Integer("k", 0, (int64_t{1} << 31) - 1)}).ok());
  ExpectInvalid({Integer("k", 0, int64_t{1} << 31)}, {"'k'"});
  ExpectInvalid(
      {Integer("k", std::numeric_limits<int64_t>::min(), std::numeric_limits<int64_t>::max())},
      {"'k'"});
}

TEST(SpaceTest, BlocksAndLevels) {
  const Space space = MakeSpace({Real("a", 0, 1), Flag("f"), Integer("k", -2, 2),
                                 Categorical("c", {"x", "y"}), Real("b", 1, 10, true), Flag("g")});
  EXPECT_EQ(space.size(), 6);
  EXPECT_EQ(space.gaussian_indices(), (std::vector<int>{0, 2, 4}));
  EXPECT_EQ(space.flag_indices(), (std::vector<int>{1, 5}));
  EXPECT_EQ(space.categorical_indices(), (std::vector<int>{3}));
  EXPECT_EQ(space.integer_levels(2), 5);
  EXPECT_EQ(space.integer_levels(0), 0);
  EXPECT_EQ(space.integer_levels(4), 0);
}

TEST(SpaceTest, CenterIsTheMiddleOfEveryRange) {
  const Space space =
      MakeSpace({Real("a", -3, 7), Integer("k", 0, 4), Flag("f"), Categorical("c", {"x", "y"})});
  const Eigen::VectorXd center = space.Center();
  ASSERT_EQ(center.size(), 4);
  EXPECT_DOUBLE_EQ(center[0], 0.5);
  EXPECT_DOUBLE_EQ(center[1], 0.5);
  EXPECT_DOUBLE_EQ(center[2], 0.5);
  EXPECT_DOUBLE_EQ(center[3], 0.0);
  const Candidate c = space.Decode(center);
  EXPECT_DOUBLE_EQ(std::get<double>(c[0]), 2.0);
  EXPECT_EQ(std::get<int64_t>(c[1]), 2);  // the middle of 0..4
}

TEST(SpaceEncodingTest, RealLinearRoundTrip) {
  const Space space = MakeSpace({Real("x", -2.0, 6.0)});
  for (double v : {-2.0, -1.0, 0.0, 2.0, 5.5, 6.0}) {
    absl::StatusOr<Eigen::VectorXd> u = space.Encode({v});
    ASSERT_TRUE(u.ok()) << u.status();
    EXPECT_NEAR((*u)[0], (v + 2.0) / 8.0, 1e-15);  // affine map of [−2, 6] onto [0, 1]
    EXPECT_NEAR(std::get<double>(space.Decode(*u)[0]), v, 1e-14);
  }
}

TEST(SpaceEncodingTest, LogScaleMapsTheGeometricMidpointToOneHalf) {
  const Space space = MakeSpace({Real("lr", 1.0, 100.0, /*log=*/true)});
  // ln 10 / ln 100 = 1/2: 10 is the midpoint of [1, 100] on the ln scale.
  absl::StatusOr<Eigen::VectorXd> u = space.Encode({10.0});
  ASSERT_TRUE(u.ok()) << u.status();
  EXPECT_DOUBLE_EQ((*u)[0], 0.5);
  EXPECT_NEAR(std::get<double>(space.Decode(Eigen::VectorXd::Constant(1, 0.5))[0]), 10.0, 1e-12);
  // Quarter points: 10^{1/2} and 10^{3/2}.
  EXPECT_NEAR(std::get<double>(space.Decode(Eigen::VectorXd::Constant(1, 0.25))[0]),
              std::sqrt(10.0), 1e-12);
  EXPECT_NEAR(std::get<double>(space.Decode(Eigen::VectorXd::Constant(1, 0.75))[0]),
              std::pow(10.0, 1.5), 1e-10);
  for (double v : {1.0, 1.5, 3.0, 42.0, 99.0, 100.0}) {
    absl::StatusOr<Eigen::VectorXd> e = space.Encode({v});
    ASSERT_TRUE(e.ok()) << e.status();
    EXPECT_NEAR((*e)[0], std::log(v) / std::log(100.0), 1e-15);
    EXPECT_NEAR(std::get<double>(space.Decode(*e)[0]), v, 1e-12 * v);
  }
}

TEST(SpaceEncodingTest, EveryIntegerEncodesToItsCellCentreAndDecodesBack) {
  const Space space = MakeSpace({Integer("k", -3, 4)});
  const double levels = 8.0;  // W = high − low + 1
  for (int64_t k = -3; k <= 4; ++k) {
    absl::StatusOr<Eigen::VectorXd> u = space.Encode({k});
    ASSERT_TRUE(u.ok()) << u.status();
    // Cell of k: [(k − low)/W, (k − low + 1)/W); its centre is (k − low + 1/2)/W.
    EXPECT_NEAR((*u)[0], (static_cast<double>(k + 3) + 0.5) / levels, 1e-15) << k;
    EXPECT_EQ(std::get<int64_t>(space.Decode(*u)[0]), k);
    // Anywhere strictly inside the cell decodes to k.
    const double lo = static_cast<double>(k + 3) / levels;
    const double hi = static_cast<double>(k + 4) / levels;
    EXPECT_EQ(std::get<int64_t>(space.Decode(Eigen::VectorXd::Constant(1, lo + 1e-9))[0]), k);
    EXPECT_EQ(std::get<int64_t>(space.Decode(Eigen::VectorXd::Constant(1, hi - 1e-9))[0]), k);
  }
}

TEST(SpaceEncodingTest, FlagsAndCategoricalsRoundTrip) {
  const Space space = MakeSpace({Flag("on"), Categorical("color", {"red", "green", "blue"})});
  for (bool on : {false, true}) {
    for (const char* color : {"red", "green", "blue"}) {
      const Candidate c = {on, std::string(color)};
      absl::StatusOr<Eigen::VectorXd> u = space.Encode(c);
      ASSERT_TRUE(u.ok()) << u.status();
      EXPECT_EQ((*u)[0], on ? 1.0 : 0.0);
      const Candidate back = space.Decode(*u);
      EXPECT_EQ(std::get<bool>(back[0]), on);
      EXPECT_EQ(std::get<std::string>(back[1]), color);
    }
  }
  absl::StatusOr<Eigen::VectorXd> u = space.Encode({true, std::string("blue")});
  ASSERT_TRUE(u.ok());
  EXPECT_EQ((*u)[1], 2.0);
}

TEST(SpaceEncodingTest, EncodeRefusesBadValuesNamingThem) {
  const Space space =
      MakeSpace({Real("x", 0.0, 1.0), Integer("k", 1, 3), Flag("on"),
                 Categorical("color", {"red", "green"}), Real("lr", 1e-4, 1.0, true)});
  const Candidate good = {0.5, int64_t{2}, true, std::string("red"), 0.01};
  ASSERT_TRUE(space.Encode(good).ok());
  struct Bad {
    int index;
    Value value;
    std::vector<std::string> fragments;
  };
  const std::vector<Bad> cases = {
      {0, 1.5, {"'x'", "1.5", "outside"}},
      {0, -0.1, {"'x'", "outside"}},
      {0, kNaN, {"'x'"}},
      {1, int64_t{4}, {"'k'", "4", "outside"}},
      {1, int64_t{0}, {"'k'", "outside"}},
      {2, int64_t{1}, {"'on'", "kind"}},
      {1, 2.0, {"'k'", "kind"}},
      {0, std::string("0.5"), {"'x'", "kind"}},
      {3, std::string("purple"), {"'color'", "'purple'"}},
      {3, true, {"'color'", "kind"}},
      {4, 2.0, {"'lr'", "outside"}},
      {4, 0.0, {"'lr'", "outside"}},
  };
  for (const Bad& bad : cases) {
    Candidate c = good;
    c[bad.index] = bad.value;
    absl::StatusOr<Eigen::VectorXd> u = space.Encode(c);
    ASSERT_FALSE(u.ok()) << "case for parameter " << bad.index;
    EXPECT_EQ(u.status().code(), absl::StatusCode::kInvalidArgument);
    for (const std::string& fragment : bad.fragments) {
      EXPECT_THAT(std::string(u.status().message()), HasSubstr(fragment));
    }
  }
  Candidate short_candidate = good;
  short_candidate.pop_back();
  absl::StatusOr<Eigen::VectorXd> u = space.Encode(short_candidate);
  ASSERT_FALSE(u.ok());
  EXPECT_EQ(u.status().code(), absl::StatusCode::kInvalidArgument);
  EXPECT_THAT(std::string(u.status().message()), AllOf(HasSubstr("candidate"), HasSubstr("4")));
}

TEST(SpaceRepairTest, ReflectsAtTheBoundsPeriodically) {
  const Space space =
      MakeSpace({Real("x", 0, 1), Integer("k", 0, 9), Flag("f"), Categorical("c", {"a", "b"})});
  auto repair = [&](double v) {
    Eigen::VectorXd x(4);
    x << v, v, 1.0, 1.0;
    const Eigen::VectorXd r = space.Repair(x);
    // Discrete coordinates are left as they are.
    EXPECT_EQ(r[2], 1.0);
    EXPECT_EQ(r[3], 1.0);
    EXPECT_EQ(r[0], r[1]);
    return r[0];
  };
  // x -> -x below 0, x -> 2 - x above 1, repeated.
  EXPECT_DOUBLE_EQ(repair(-0.25), 0.25);
  EXPECT_DOUBLE_EQ(repair(1.25), 0.75);
  EXPECT_DOUBLE_EQ(repair(2.5), 0.5);
  EXPECT_DOUBLE_EQ(repair(-2.5), 0.5);
  EXPECT_DOUBLE_EQ(repair(3.25), 0.75);  // 3.25 -> 2 - 3.25 = -1.25 -> 1.25 -> 0.75
  EXPECT_DOUBLE_EQ(repair(-1.0), 1.0);
  EXPECT_DOUBLE_EQ(repair(2.0), 0.0);
  for (double inside : {0.0, 1e-300, 0.1, 0.5, 0.999, 1.0}) EXPECT_EQ(repair(inside), inside);
}

// Returns true if every value of the candidate lies inside its parameter's declared bounds.
::testing::AssertionResult InsideBounds(const Space& space, const Candidate& c) {
  if (static_cast<int>(c.size()) != space.size()) {
    return ::testing::AssertionFailure() << "wrong size";
  }
  for (int i = 0; i < space.size(); ++i) {
    const ParameterSpec& p = space.parameter(i);
    switch (p.kind) {
      case ParameterKind::kReal: {
        if (!std::holds_alternative<double>(c[i])) {
          return ::testing::AssertionFailure() << p.name << " kind";
        }
        const double v = std::get<double>(c[i]);
        if (!(v >= p.low && v <= p.high)) {
          return ::testing::AssertionFailure()
                 << p.name << " = " << v << " outside [" << p.low << ", " << p.high << "]";
        }
        break;
      }
      case ParameterKind::kInteger: {
        if (!std::holds_alternative<int64_t>(c[i])) {
          return ::testing::AssertionFailure() << p.name << " kind";
        }
        const int64_t v = std::get<int64_t>(c[i]);
        if (v < p.integer_low || v > p.integer_high) {
          return ::testing::AssertionFailure() << p.name << " = " << v << " outside";
        }
        break;
      }
      case ParameterKind::kFlag:
        if (!std::holds_alternative<bool>(c[i])) {
          return ::testing::AssertionFailure() << p.name << " kind";
        }
        break;
      case ParameterKind::kCategorical: {
        if (!std::holds_alternative<std::string>(c[i])) {
          return ::testing::AssertionFailure() << p.name << " kind";
        }
        const std::string& v = std::get<std::string>(c[i]);
        if (std::find(p.options.begin(), p.options.end(), v) == p.options.end()) {
          return ::testing::AssertionFailure() << p.name << " = '" << v << "' is no option";
        }
        break;
      }
    }
  }
  return ::testing::AssertionSuccess();
}

// A coordinate drawn from a mix of ordinary, huge, tiny and boundary values.
double AwkwardCoordinate(RandomStream& random) {
  static const double kSpecial[] = {0.0,
                                    -0.0,
                                    1.0,
                                    2.0,
                                    -1.0,
                                    3.0,
                                    std::nextafter(0.0, -1.0),
                                    std::nextafter(0.0, 1.0),
                                    std::nextafter(1.0, 2.0),
                                    std::nextafter(1.0, 0.0),
                                    std::numeric_limits<double>::min(),
                                    -std::numeric_limits<double>::min(),
                                    std::numeric_limits<double>::denorm_min(),
                                    -std::numeric_limits<double>::denorm_min(),
                                    1e12,
                                    -1e12,
                                    1e300,
                                    -1e300,
                                    std::numeric_limits<double>::max(),
                                    std::numeric_limits<double>::lowest(),
                                    0.5,
                                    1e-17,
                                    1.0 - 1e-17};
  constexpr int kSpecialCount = sizeof(kSpecial) / sizeof(kSpecial[0]);
  switch (random.UniformBelow(5)) {
    case 0:
      return kSpecial[random.UniformBelow(kSpecialCount)];
    case 1:
      return random.Uniform();  // inside
    case 2:
      return 3.0 * random.Normal() + 0.5;  // a little outside
    case 3:
      return 1e12 * random.Normal();  // far outside
    default: {
      // Any magnitude from 1e-300 to 1e300, either sign.
      const double magnitude = std::pow(10.0, -300.0 + 600.0 * random.Uniform());
      return random.Uniform() < 0.5 ? -magnitude : magnitude;
    }
  }
}

// Bounds are hard (space.h): whatever internal vector the search produces, the decoded candidate
// lies inside every declared bound. Proposals may drive real equipment, so this is a safety
// property.
TEST(SpaceBoundsTest, DecodedCandidatesNeverLeaveTheirBounds) {
  const Space space = MakeSpace({
      Real("x", -1.0, 1.0),
      Real("tiny", 1e-9, 2e-9),
      Real("offset", 1e6, 1e6 + 1e-3),
      Real("lr", 1e-8, 1.0, /*log=*/true),
      Real("wide_log", 1e-300, 1e300, /*log=*/true),
      Real("narrow_log", 1.0, 1.0 + 1e-12, /*log=*/true),
      Integer("k", -5, 5),
      Integer("bit", 0, 1),
      Integer("big", -(int64_t{1} << 30), (int64_t{1} << 30) - 1),
      Integer("near_max", std::numeric_limits<int64_t>::max() - 3,
              std::numeric_limits<int64_t>::max()),
      Integer("near_min", std::numeric_limits<int64_t>::min(),
              std::numeric_limits<int64_t>::min() + 2),
      Flag("on"),
      Categorical("color", {"red", "green", "blue"}),
  });
  RandomStream random(7);
  constexpr int kVectors = 100000;
  for (int t = 0; t < kVectors; ++t) {
    Eigen::VectorXd x(space.size());
    for (int i = 0; i < space.size(); ++i) x[i] = AwkwardCoordinate(random);
    const Candidate c = space.Decode(x);
    ASSERT_TRUE(InsideBounds(space, c)) << "vector " << t << ": " << x.transpose();
    const Eigen::VectorXd repaired = space.Repair(x);
    for (int i : space.gaussian_indices()) {
      ASSERT_TRUE(repaired[i] >= 0.0 && repaired[i] <= 1.0)
          << "vector " << t << " coordinate " << i << " " << x[i] << " -> " << repaired[i];
    }
  }
}

// A range may be wider than the largest double: low = −1e308, high = 1e308 passes validation (both
// finite, low < high) but high − low overflows to infinity. Bounds are still hard and the map still
// has to be a map: decoded values must be finite, inside the bounds, and increase with u.
TEST(SpaceBoundsTest, RangeWiderThanTheLargestDoubleStillDecodesInside) {
  absl::StatusOr<Space> space = Space::Create({Real("huge", -1e308, 1e308)});
  if (!space.ok()) {
    // Refusing such a range is also acceptable, if said clearly.
    EXPECT_EQ(space.status().code(), absl::StatusCode::kInvalidArgument);
    EXPECT_THAT(std::string(space.status().message()), HasSubstr("'huge'"));
    return;
  }
  double previous = -std::numeric_limits<double>::infinity();
  for (double u : {0.0, 0.25, 0.5, 0.75, 1.0}) {
    const Candidate c = space->Decode(Eigen::VectorXd::Constant(1, u));
    EXPECT_TRUE(InsideBounds(*space, c)) << "u=" << u;
    const double v = std::get<double>(c[0]);
    EXPECT_GT(v, previous) << "u=" << u;
    previous = v;
  }
  // The midpoint of [−1e308, 1e308] is 0.
  EXPECT_NEAR(std::get<double>(space->Decode(Eigen::VectorXd::Constant(1, 0.5))[0]), 0.0, 1e295);
  absl::StatusOr<Eigen::VectorXd> u = space->Encode({0.0});
  ASSERT_TRUE(u.ok()) << u.status();
  EXPECT_NEAR((*u)[0], 0.5, 1e-12);
}

}  // namespace
}  // namespace ogive::search
