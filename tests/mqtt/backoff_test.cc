#include "mqtt/internal/backoff.h"

#include <gtest/gtest.h>

namespace nightjar::mqtt::internal {
namespace {

// Expected values by hand from the formula in backoff.h (common practice).
TEST(BackoffTest, DoublesFromTheMinimumUpToTheCap) {
  // u = 1 - epsilon gives (almost) the base; u = 0 gives half of it.
  EXPECT_DOUBLE_EQ(ReconnectDelaySeconds(1, 1.0, 60.0, 0.0), 0.5);
  EXPECT_NEAR(ReconnectDelaySeconds(1, 1.0, 60.0, 0.999999), 1.0, 1e-6);
  EXPECT_DOUBLE_EQ(ReconnectDelaySeconds(2, 1.0, 60.0, 0.0), 1.0);
  EXPECT_DOUBLE_EQ(ReconnectDelaySeconds(3, 1.0, 60.0, 0.0), 2.0);
  EXPECT_DOUBLE_EQ(ReconnectDelaySeconds(6, 1.0, 60.0, 0.0), 16.0);
  EXPECT_DOUBLE_EQ(ReconnectDelaySeconds(7, 1.0, 60.0, 0.0), 30.0);  // base capped at 60
  EXPECT_DOUBLE_EQ(ReconnectDelaySeconds(1000, 1.0, 60.0, 0.5), 45.0);
  EXPECT_DOUBLE_EQ(ReconnectDelaySeconds(0, 0.25, 4.0, 0.0), 0.125);  // 0 counts as 1
}

TEST(BackoffTest, JitterStaysWithinHalfTheBaseAndTheBase) {
  for (int failures = 1; failures <= 12; ++failures) {
    for (double u = 0.0; u < 1.0; u += 0.125) {
      const double d = ReconnectDelaySeconds(failures, 0.5, 30.0, u);
      const double base = std::min(30.0, 0.5 * (1 << (failures - 1)));
      EXPECT_GE(d, base / 2) << failures << " " << u;
      EXPECT_LT(d, base) << failures << " " << u;
    }
  }
}

}  // namespace
}  // namespace nightjar::mqtt::internal
