// Scales, domains and ticks: hand-checked values.
#include "client/plot/scale.h"

#include <cmath>

#include "gmock/gmock.h"
#include "gtest/gtest.h"

namespace ogive::plot {
namespace {

using ::testing::DoubleNear;
using ::testing::ElementsAre;
using ::testing::Pointwise;

TEST(Scale, MapsLinearlyAndInvertsForYAxes) {
  const Scale x{{0, 10}, 50, 550, false};
  EXPECT_DOUBLE_EQ(x.Map(0), 50);
  EXPECT_DOUBLE_EQ(x.Map(10), 550);
  EXPECT_DOUBLE_EQ(x.Map(2.5), 175);
  EXPECT_DOUBLE_EQ(x.Map(-1), 0);  // outside the domain maps outside the range
  const Scale y{{-1, 1}, 240, 40, false};
  EXPECT_DOUBLE_EQ(y.Map(-1), 240);
  EXPECT_DOUBLE_EQ(y.Map(1), 40);
  EXPECT_DOUBLE_EQ(y.Map(0), 140);
}

TEST(Scale, MapsLogAxesByDecadeAndDropsNonPositiveValues) {
  const Scale y{{1e-6, 1}, 200, 20, true};  // six decades over 180 px
  EXPECT_DOUBLE_EQ(y.Map(1e-6), 200);
  EXPECT_DOUBLE_EQ(y.Map(1), 20);
  EXPECT_NEAR(y.Map(1e-3), 110, 1e-9);
  EXPECT_NEAR(y.Map(1e-5), 170, 1e-9);
  EXPECT_TRUE(std::isnan(y.Map(0)));
  EXPECT_TRUE(std::isnan(y.Map(-3)));
}

TEST(NiceStep, IsOneTwoOrFiveTimesAPowerOfTen) {
  EXPECT_DOUBLE_EQ(NiceStep(1, 5), 0.2);
  EXPECT_DOUBLE_EQ(NiceStep(97, 5), 20);
  EXPECT_DOUBLE_EQ(NiceStep(320, 6), 50);  // 53.3 -> 50
  EXPECT_DOUBLE_EQ(NiceStep(0.03, 6), 0.005);
  EXPECT_DOUBLE_EQ(NiceStep(7, 7), 1);
  EXPECT_DOUBLE_EQ(NiceStep(1.45, 5), 0.2);  // 0.29 -> 0.2
  EXPECT_DOUBLE_EQ(NiceStep(0.4, 5), 0.1);   // 0.08 -> 0.1
}

TEST(NiceLinearDomain, WidensToRoundNumbers) {
  Domain d = NiceLinearDomain(3, 97, 5);
  EXPECT_DOUBLE_EQ(d.lo, 0);
  EXPECT_DOUBLE_EQ(d.hi, 100);
  d = NiceLinearDomain(0.51, 1.93, 5);  // step 0.2
  EXPECT_DOUBLE_EQ(d.lo, 0.4);
  EXPECT_DOUBLE_EQ(d.hi, 2);
  d = NiceLinearDomain(-12.5, -3, 5);  // step 2
  EXPECT_DOUBLE_EQ(d.lo, -14);
  EXPECT_DOUBLE_EQ(d.hi, -2);
  d = NiceLinearDomain(4, 4, 5);  // an empty interval is widened by 10% around its value
  EXPECT_LT(d.lo, 4);
  EXPECT_GT(d.hi, 4);
  d = NiceLinearDomain(0, 0, 5);
  EXPECT_LE(d.lo, -1);
  EXPECT_GE(d.hi, 1);
  d = NiceLinearDomain(NAN, 3, 5);
  EXPECT_EQ(d.lo, 0);
  EXPECT_EQ(d.hi, 1);
}

TEST(NiceLogDomain, WidensToWholeDecades) {
  Domain d = NiceLogDomain(3e-7, 0.4);
  EXPECT_DOUBLE_EQ(d.lo, 1e-7);
  EXPECT_DOUBLE_EQ(d.hi, 1);
  d = NiceLogDomain(2, 5);  // inside one decade
  EXPECT_DOUBLE_EQ(d.lo, 1);
  EXPECT_DOUBLE_EQ(d.hi, 10);
  d = NiceLogDomain(10, 10);  // on a power of ten
  EXPECT_DOUBLE_EQ(d.lo, 10);
  EXPECT_DOUBLE_EQ(d.hi, 100);
  d = NiceLogDomain(-1, 5);
  EXPECT_EQ(d.lo, 1);
  EXPECT_EQ(d.hi, 10);
}

TEST(LinearTicks, LieOnRoundNumbersInsideTheDomain) {
  EXPECT_THAT(LinearTicks({0, 1}, 5), Pointwise(DoubleNear(1e-12), {0.0, 0.2, 0.4, 0.6, 0.8, 1.0}));
  EXPECT_THAT(LinearTicks({0, 100}, 5), ElementsAre(0, 20, 40, 60, 80, 100));
  // Bounds that are not round: ticks only inside them.
  EXPECT_THAT(LinearTicks({1, 320}, 6), ElementsAre(50, 100, 150, 200, 250, 300));
  EXPECT_THAT(LinearTicks({0.5, 1.95}, 3), Pointwise(DoubleNear(1e-12), {0.5, 1.0, 1.5}));
  // Zero is exactly zero, not -0 or round-off.
  for (double t : LinearTicks({-0.3, 0.3}, 6)) {
    if (std::abs(t) < 0.01) {
      EXPECT_EQ(t, 0.0);
    }
  }
  EXPECT_TRUE(LinearTicks({1, 1}, 5).empty());
}

TEST(LogTicks, ArePowersOfTenOrOneTwoFiveWithinADecadeOrTwo) {
  EXPECT_THAT(LogTicks({1e-6, 1}), Pointwise(DoubleNear(1e-18), {1e-6, 1e-5, 1e-4, 1e-3, 1e-2, 1e-1, 1.0}));
  EXPECT_THAT(LogTicks({1, 100}), ElementsAre(1, 2, 5, 10, 20, 50, 100));
  EXPECT_THAT(LogTicks({1.5, 8}), ElementsAre(2, 5));
  // Twenty decades: every third power, at most eight ticks.
  const std::vector<double> many = LogTicks({1e-20, 1});
  EXPECT_LE(many.size(), 8u);
  EXPECT_DOUBLE_EQ(many[0], 1e-20);
  EXPECT_NEAR(std::log10(many[1]), -17, 1e-9);
  EXPECT_TRUE(LogTicks({0, 10}).empty());
}

TEST(TickLabel, UsesAsFewDigitsAsTheStepNeeds) {
  EXPECT_EQ(TickLabel(0, 0.2), "0");
  EXPECT_EQ(TickLabel(1e-17, 0.2), "0");  // round-off of k * step
  EXPECT_EQ(TickLabel(0.6000000000000001, 0.2), "0.6");
  EXPECT_EQ(TickLabel(0.25, 0.05), "0.25");
  EXPECT_EQ(TickLabel(1500, 500), "1500");
  EXPECT_EQ(TickLabel(-2, 1), "-2");
  EXPECT_EQ(TickLabel(2000000, 1000000), "2e6");
  EXPECT_EQ(TickLabel(2500000, 500000), "2.5e6");
  EXPECT_EQ(TickLabel(5e-7, 1e-7), "5e-7");
}

TEST(LogTickLabel, IsPlainInTheMiddleAndExponentialBeyond) {
  EXPECT_EQ(LogTickLabel(0.001), "0.001");
  EXPECT_EQ(LogTickLabel(1), "1");
  EXPECT_EQ(LogTickLabel(10000), "10000");
  EXPECT_EQ(LogTickLabel(1e-6), "1e-6");
  EXPECT_EQ(LogTickLabel(2e5), "2e5");
  EXPECT_EQ(LogTickLabel(1e-10), "1e-10");
}

}  // namespace
}  // namespace ogive::plot
