#include "core/sample_period.h"

#include <gtest/gtest.h>

#include <cmath>
#include <random>

#include "support/allocation_counter.h"

// Every check here follows common practice for robust rate estimation (median of
// intervals); the duplicate and backward-jump rules are our documented answer to
// DESIGN-NOTES §6 ("sampling clocks lie").

namespace nightjar::core {
namespace {

constexpr TimestampUs kT0 = 1'700'000'000 * kMicrosPerSecond;

TimestampUs At(double s) { return kT0 + FromSeconds(s); }

SamplePeriodOptions Learn(int intervals) {
  SamplePeriodOptions options;
  options.learn_intervals = intervals;
  return options;
}

TEST(SamplePeriodTest, ValidateOptions) {
  EXPECT_TRUE(ValidateSamplePeriodOptions({}).ok());  // common practice: defaults valid
  EXPECT_EQ(ValidateSamplePeriodOptions(Learn(0)).code(),
            StatusCode::kInvalidArgument);  // common practice
  EXPECT_EQ(ValidateSamplePeriodOptions(Learn(5000)).code(),
            StatusCode::kInvalidArgument);  // common practice
  SamplePeriodOptions negative;
  negative.configured_period_s = -1;
  EXPECT_EQ(ValidateSamplePeriodOptions(negative).code(),
            StatusCode::kInvalidArgument);  // common practice
}

TEST(SamplePeriodTest, UnknownUntilEnoughIntervals) {
  SamplePeriod period(Learn(8));
  EXPECT_FALSE(period.known());                   // common practice
  EXPECT_TRUE(std::isnan(period.period_s()));     // common practice: NaN while unknown
  for (int i = 0; i < 8; ++i) period.Add(At(i));  // 8 samples = 7 intervals
  EXPECT_FALSE(period.known());                   // common practice
  EXPECT_EQ(period.intervals_seen(), 7);          // common practice
  period.Add(At(8));
  EXPECT_TRUE(period.known());               // common practice
  EXPECT_DOUBLE_EQ(period.period_s(), 1.0);  // common practice
}

TEST(SamplePeriodTest, MedianOfJitteredClock) {
  // 2 s nominal with uniform +/-0.3 s jitter and a few long gaps: the median ignores both.
  std::mt19937 rng(42);
  std::uniform_real_distribution<double> jitter(-0.3, 0.3);
  SamplePeriod period;  // 64 intervals
  double t = 0;
  for (int i = 0; i <= 64; ++i) {
    period.Add(At(t));
    t += 2.0 + jitter(rng) + (i % 16 == 15 ? 60.0 : 0.0);
  }
  ASSERT_TRUE(period.known());               // common practice
  EXPECT_NEAR(period.period_s(), 2.0, 0.1);  // common practice: robust to jitter and gaps
}

TEST(SamplePeriodTest, EvenAndOddMedian) {
  SamplePeriod even(Learn(4));
  for (double s : {0.0, 1.0, 3.0, 6.0, 10.0}) even.Add(At(s));  // intervals 1, 2, 3, 4
  EXPECT_DOUBLE_EQ(even.period_s(), 2.5);  // common practice: mean of the middle two
  SamplePeriod odd(Learn(3));
  for (double s : {0.0, 4.0, 5.0, 7.0}) odd.Add(At(s));  // intervals 4, 1, 2
  EXPECT_DOUBLE_EQ(odd.period_s(), 2.0);                 // common practice
}

TEST(SamplePeriodTest, RepeatedTimestampsCountedAndIgnored) {
  SamplePeriod period(Learn(4));
  for (double s : {0.0, 1.0, 1.0, 2.0, 2.0, 2.0, 3.0, 4.0}) period.Add(At(s));
  EXPECT_EQ(period.duplicates(), 3);         // common practice (DESIGN-NOTES §6)
  EXPECT_EQ(period.samples(), 8);            // common practice
  ASSERT_TRUE(period.known());               // common practice
  EXPECT_DOUBLE_EQ(period.period_s(), 1.0);  // common practice: no zero intervals used
}

TEST(SamplePeriodTest, BackwardJumpCountedAndIgnored) {
  SamplePeriod period(Learn(6));
  // One out-of-order sample at 1.5 among a 1 s clock: it yields no interval and costs at
  // most one outlier interval (1.5 -> 4 = 2.5 s), which the median absorbs.
  for (double s : {0.0, 1.0, 2.0, 3.0, 1.5, 4.0, 5.0, 6.0, 7.0}) period.Add(At(s));
  EXPECT_EQ(period.backward_jumps(), 1);     // common practice (DESIGN-NOTES §6)
  ASSERT_TRUE(period.known());               // common practice
  EXPECT_DOUBLE_EQ(period.period_s(), 1.0);  // common practice
}

TEST(SamplePeriodTest, ClockResetKeepsMeasuring) {
  SamplePeriod period(Learn(4));
  for (double s : {1000.0, 1002.0, 0.0, 2.0, 4.0, 6.0}) period.Add(At(s));
  EXPECT_EQ(period.backward_jumps(), 1);     // common practice (DESIGN-NOTES §6)
  ASSERT_TRUE(period.known());               // common practice: re-anchored at 0
  EXPECT_DOUBLE_EQ(period.period_s(), 2.0);  // common practice
}

TEST(SamplePeriodTest, FrozenAfterLearning) {
  SamplePeriod period(Learn(4));
  for (int i = 0; i <= 4; ++i) period.Add(At(i));
  ASSERT_DOUBLE_EQ(period.period_s(), 1.0);
  for (int i = 1; i <= 100; ++i) period.Add(At(4 + 5 * i));  // the clock slows later
  EXPECT_DOUBLE_EQ(period.period_s(), 1.0);                  // common practice: frozen
  EXPECT_EQ(period.intervals_seen(), 4);                     // common practice
}

TEST(SamplePeriodTest, ConfiguredPeriodOverrides) {
  SamplePeriodOptions options = Learn(4);
  options.configured_period_s = 0.5;
  SamplePeriod period(options);
  EXPECT_TRUE(period.known());               // common practice: known from the start
  EXPECT_DOUBLE_EQ(period.period_s(), 0.5);  // common practice
  EXPECT_FALSE(period.estimate_known());     // common practice
  for (int i = 0; i <= 4; ++i) period.Add(At(i));
  EXPECT_DOUBLE_EQ(period.period_s(), 0.5);            // common practice: config wins
  ASSERT_TRUE(period.estimate_known());                // common practice
  EXPECT_DOUBLE_EQ(period.estimated_period_s(), 1.0);  // common practice: for a mismatch warning
}

TEST(SamplePeriodTest, AddNeverAllocates) {
  SamplePeriod period;
  nightjar::testing::AllocationCounter counter;
  for (int i = 0; i < 200; ++i) period.Add(At(i % 50 == 49 ? i - 10 : i));
  EXPECT_TRUE(period.known());     // common practice
  EXPECT_EQ(counter.count(), 0U);  // common practice: STYLE.md, no heap on the sample path
}

TEST(SamplePeriodTest, CopyKeepsLearningWithoutAllocating) {
  SamplePeriod original(Learn(8));
  original.Add(At(0));
  original.Add(At(1));
  SamplePeriod copy = original;
  nightjar::testing::AllocationCounter counter;
  for (int i = 2; i <= 8; ++i) copy.Add(At(i));
  EXPECT_EQ(counter.count(), 0U);          // common practice
  EXPECT_DOUBLE_EQ(copy.period_s(), 1.0);  // common practice
  EXPECT_FALSE(original.known());          // common practice: independent copies
}

}  // namespace
}  // namespace nightjar::core
