#include "core/residual_scale.h"

#include <gtest/gtest.h>

#include <cmath>
#include <random>

namespace nightjar::core {
namespace {

TEST(ResidualScaleTest, EstimatesGaussianSigma) {
  // For N(0, s^2), E|x| = s * sqrt(2/pi) (any statistics handbook; common practice).
  std::mt19937_64 rng(7);
  std::normal_distribution<double> noise(0.0, 2.5);
  ResidualScale scale(1.0 / 4096.0, 1e-6, 4.0);
  for (int i = 0; i < 200000; ++i) scale.Update(noise(rng));
  EXPECT_NEAR(scale.sigma(), 2.5, 0.05);
}

TEST(ResidualScaleTest, OutliersMoveItByABoundedAmount) {
  std::mt19937_64 rng(8);
  std::normal_distribution<double> noise(0.0, 1.0);
  ResidualScale scale(1.0 / 512.0, 1e-6, 4.0);
  for (int i = 0; i < 20000; ++i) scale.Update(noise(rng));
  const double before = scale.sigma();
  scale.Update(1e6);  // one wild residual, clipped at 4 sigma
  EXPECT_LT(scale.sigma(), before * 1.01);
}

TEST(ResidualScaleTest, FloorStopsZeroScale) {
  // DESIGN-NOTES §5: channels that hold their value give zero residuals.
  ResidualScale scale(1.0 / 512.0, 0.01, 4.0);
  for (int i = 0; i < 1000; ++i) scale.Update(0.0);
  EXPECT_DOUBLE_EQ(scale.sigma(), 0.01);
}

}  // namespace
}  // namespace nightjar::core
