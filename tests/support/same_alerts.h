// Bit-for-bit comparison for restore tests: a channel restored from a checkpoint must give
// exactly what the uninterrupted one gives, so doubles are compared as bit patterns (NaN
// and -0 included), not by value.
#pragma once

#include <gtest/gtest.h>

#include <cstddef>
#include <cstring>
#include <vector>

#include "core/alert.h"

namespace nightjar::testing {

inline bool SameBits(double a, double b) { return std::memcmp(&a, &b, sizeof a) == 0; }

inline void ExpectSameAlerts(const std::vector<core::Alert>& a, const std::vector<core::Alert>& b) {
  ASSERT_EQ(a.size(), b.size());
  for (std::size_t i = 0; i < a.size(); ++i) {
    EXPECT_EQ(a[i].time, b[i].time) << i;
    EXPECT_EQ(a[i].channel, b[i].channel) << i;
    EXPECT_EQ(a[i].kind, b[i].kind) << i;
    EXPECT_EQ(a[i].detector, b[i].detector) << i;
    EXPECT_EQ(a[i].phase, b[i].phase) << i;
    EXPECT_TRUE(SameBits(a[i].value, b[i].value)) << i;
    EXPECT_TRUE(SameBits(a[i].expected, b[i].expected)) << i;
    EXPECT_TRUE(SameBits(a[i].z, b[i].z)) << i;
    EXPECT_TRUE(SameBits(a[i].statistic, b[i].statistic)) << i;
    EXPECT_EQ(a[i].message, b[i].message) << i;
  }
}

}  // namespace nightjar::testing
