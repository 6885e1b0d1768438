#include "core/input_scaler.h"

#include <gtest/gtest.h>

#include <cmath>

namespace nightjar::core {
namespace {

TEST(InputScalerTest, LearnsMeanAndSampleStandardDeviation) {
  // 2, 4, 4, 4, 5, 5, 7, 9: mean 5, sample variance 32/7 (textbook example; common practice).
  InputScalerOptions options;
  options.warmup_samples = 8;
  InputScaler scaler(options);
  for (double x : {2.0, 4.0, 4.0, 4.0, 5.0, 5.0, 7.0, 9.0}) scaler.Learn(x);
  ASSERT_TRUE(scaler.ready());
  EXPECT_DOUBLE_EQ(scaler.mean(), 5.0);
  EXPECT_NEAR(scaler.scale(), std::sqrt(32.0 / 7.0), 1e-12);
  EXPECT_NEAR(scaler.Scale(5.0 + scaler.scale()), 1.0, 1e-12);
  EXPECT_NEAR(scaler.Unscale(scaler.Scale(6.5)), 6.5, 1e-12);
}

TEST(InputScalerTest, FrozenScaleStaysPutByDefault) {
  InputScalerOptions options;
  options.warmup_samples = 4;
  InputScaler scaler(options);
  for (double x : {1.0, 2.0, 3.0, 4.0}) scaler.Learn(x);
  scaler.Freeze();
  const double mean = scaler.mean();
  for (int i = 0; i < 100; ++i) scaler.Learn(1000.0);
  EXPECT_DOUBLE_EQ(scaler.mean(), mean);
}

TEST(InputScalerTest, AdaptsSlowlyWhenAsked) {
  InputScalerOptions options;
  options.warmup_samples = 4;
  options.adapt_alpha = 0.01;
  InputScaler scaler(options);
  for (double x : {1.0, 2.0, 3.0, 4.0}) scaler.Learn(x);
  scaler.Freeze();
  for (int i = 0; i < 1000; ++i) scaler.Learn(10.0);
  // After 1000 steps of weight 0.01 the old mean keeps (0.99)^1000 = 4.3e-5 of its weight.
  EXPECT_NEAR(scaler.mean(), 10.0, 1e-3);
}

TEST(InputScalerTest, ConstantChannelDoesNotDivideByZero) {
  InputScalerOptions options;
  options.warmup_samples = 10;
  InputScaler scaler(options);
  for (int i = 0; i < 10; ++i) scaler.Learn(42.0);
  EXPECT_GT(scaler.scale(), 0.0);
  EXPECT_TRUE(std::isfinite(scaler.Scale(43.0)));
  EXPECT_DOUBLE_EQ(scaler.Scale(1e9), InputScaler::kMaxScaled);
}

}  // namespace
}  // namespace nightjar::core
