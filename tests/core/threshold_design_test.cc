#include "core/threshold_design.h"

#include <gtest/gtest.h>

namespace nightjar::core {
namespace {

TEST(NormalQuantileTest, MatchesStandardNormalTable) {
  // Standard normal table values (NIST/SEMATECH e-Handbook §1.3.6.7.1; from memory):
  // P(|Z| > 1.959964) = 0.05, P(|Z| > 3.290527) = 0.001, P(|Z| > 4.417173) = 1e-5.
  EXPECT_NEAR(NormalTwoSidedQuantile(0.05), 1.959964, 1e-6);
  EXPECT_NEAR(NormalTwoSidedQuantile(0.001), 3.290527, 1e-6);
  EXPECT_NEAR(NormalTwoSidedQuantile(1e-5), 4.417173, 1e-6);
}

TEST(ThresholdDesignerTest, BudgetMapsToPublishedDesignPoints) {
  // Budget 2.592 false alerts/day at 1 Hz shared by three charts gives each chart
  // ARL0 = 3 * 86400 / 2.592 = 1e5 samples.
  // Reference: references.md §1.6 (two-sided CUSUM k = 0.5, ARL0 1e5 -> h = 10.355) and
  // §2.4 (EWMA lambda = 0.1, ARL0 1e5 -> L = 4.322), both computed there by integral
  // equation and Markov chain.
  ThresholdOptions options;
  options.false_alarms_per_day = 2.592;
  ThresholdDesigner designer;
  Result<Thresholds> t = designer.Design(options, 1.0);
  ASSERT_TRUE(t.ok()) << t.status().message();
  EXPECT_NEAR(t->arl0_per_chart, 1e5, 1e-6);
  EXPECT_NEAR(t->cusum_h, 10.355, 0.01);
  EXPECT_NEAR(t->ewma_l, 4.322, 0.005);
  EXPECT_NEAR(t->spike_limit, 4.417173, 1e-5);
}

TEST(ThresholdDesignerTest, SlowerSamplingNeedsLowerThresholds) {
  // Same budget per day, ten times fewer samples: ARL0 falls tenfold (1e5 -> 1e4),
  // so h falls to the 1e4 design point 8.053 (references.md §1.6).
  ThresholdOptions options;
  options.false_alarms_per_day = 2.592;
  ThresholdDesigner designer;
  Result<Thresholds> t = designer.Design(options, 10.0);
  ASSERT_TRUE(t.ok());
  EXPECT_NEAR(t->arl0_per_chart, 1e4, 1e-6);
  EXPECT_NEAR(t->cusum_h, 8.053, 0.01);
}

TEST(ThresholdDesignerTest, ExplicitValuesWin) {
  ThresholdOptions options;
  options.cusum_h = 5.0;
  options.ewma_l = 3.0;
  options.spike_limit = 6.0;
  ThresholdDesigner designer;
  Result<Thresholds> t = designer.Design(options, 1.0);
  ASSERT_TRUE(t.ok());
  EXPECT_DOUBLE_EQ(t->cusum_h, 5.0);
  EXPECT_DOUBLE_EQ(t->ewma_l, 3.0);
  EXPECT_DOUBLE_EQ(t->spike_limit, 6.0);
}

TEST(ThresholdDesignerTest, RejectsBadOptionsNamingTheKey) {
  ThresholdOptions options;
  options.cusum_k = -1.0;
  ThresholdDesigner designer;
  Result<Thresholds> t = designer.Design(options, 1.0);
  ASSERT_FALSE(t.ok());
  EXPECT_NE(t.status().message().find("thresholds.cusum_k"), std::string::npos);
  options = ThresholdOptions{};
  options.false_alarms_per_day = 0.0;
  EXPECT_FALSE(designer.Design(options, 1.0).ok());
  EXPECT_FALSE(designer.Design(ThresholdOptions{}, 0.0).ok());
}

}  // namespace
}  // namespace nightjar::core
