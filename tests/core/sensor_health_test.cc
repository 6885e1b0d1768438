#include "core/sensor_health.h"

#include <gtest/gtest.h>

#include <array>
#include <cstddef>
#include <limits>

#include "support/allocation_counter.h"

// Every check here follows common practice for raw-signal validation (no standard
// prescribes these); the timestamp rules are our documented answer to DESIGN-NOTES §6.

namespace nightjar::core {
namespace {

constexpr TimestampUs kT0 = 1'700'000'000 * kMicrosPerSecond;
constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
constexpr double kInf = std::numeric_limits<double>::infinity();

TimestampUs At(double s) { return kT0 + FromSeconds(s); }

SensorHealthOptions Flatline(int samples, double tolerance) {
  SensorHealthOptions options;
  options.flatline_samples = samples;
  options.flatline_tolerance = tolerance;
  return options;
}

TEST(SensorHealthTest, ValidateOptions) {
  EXPECT_TRUE(ValidateSensorHealthOptions({}).ok());  // common practice: defaults valid
  SensorHealthOptions o;
  o.min_value = 5;
  o.max_value = 1;
  EXPECT_EQ(ValidateSensorHealthOptions(o).code(),
            StatusCode::kInvalidArgument);  // common practice
  o = {};
  o.max_value = kNaN;
  EXPECT_EQ(ValidateSensorHealthOptions(o).code(),
            StatusCode::kInvalidArgument);  // common practice
  EXPECT_EQ(ValidateSensorHealthOptions(Flatline(1, 0)).code(),
            StatusCode::kInvalidArgument);  // common practice: 1 would flag every sample
  EXPECT_EQ(ValidateSensorHealthOptions(Flatline(-3, 0)).code(),
            StatusCode::kInvalidArgument);  // common practice
  EXPECT_EQ(ValidateSensorHealthOptions(Flatline(5, -0.1)).code(),
            StatusCode::kInvalidArgument);  // common practice
  EXPECT_EQ(ValidateSensorHealthOptions(Flatline(5, kInf)).code(),
            StatusCode::kInvalidArgument);  // common practice
  o = {};
  o.gap_periods = -1;
  Status bad_gap = ValidateSensorHealthOptions(o);
  EXPECT_EQ(bad_gap.code(), StatusCode::kInvalidArgument);              // common practice
  EXPECT_NE(bad_gap.message().find("gap_periods"), std::string::npos);  // common practice
}

TEST(SensorHealthTest, FaultNames) {
  EXPECT_STREQ(SensorFaultName(SensorCheck::kNotFinite), "not_finite");     // common practice
  EXPECT_STREQ(SensorFaultName(SensorCheck::kOutOfRange), "out_of_range");  // common practice
  EXPECT_STREQ(SensorFaultName(SensorCheck::kFlatline), "flatline");        // common practice
  EXPECT_STREQ(SensorFaultName(0), "unknown");                              // common practice
}

TEST(SensorHealthTest, DefaultsPassFiniteValues) {
  SensorHealth health;
  EXPECT_TRUE(health.Check(At(0), 1e300).ok());   // common practice: no bounds by default
  EXPECT_TRUE(health.Check(At(1), -1e300).ok());  // common practice
  EXPECT_TRUE(health.Check(At(2), 0.0).ok());     // common practice
}

TEST(SensorHealthTest, NotFiniteValues) {
  SensorHealthOptions options;
  options.min_value = 0;
  options.max_value = 10;
  SensorHealth health(options);
  for (double bad : {kNaN, kInf, -kInf}) {
    const SensorCheck check = health.Check(At(0), bad);
    EXPECT_TRUE(check.not_finite());     // common practice
    EXPECT_FALSE(check.out_of_range());  // common practice: one fault, not two
    EXPECT_FALSE(check.flatline());      // common practice
  }
}

TEST(SensorHealthTest, OutOfRangeBoundsInclusive) {
  SensorHealthOptions options;
  options.min_value = 4;
  options.max_value = 20;
  SensorHealth health(options);
  EXPECT_TRUE(health.Check(At(0), 4.0).ok());             // common practice: bound is in span
  EXPECT_TRUE(health.Check(At(1), 20.0).ok());            // common practice
  EXPECT_TRUE(health.Check(At(2), 3.99).out_of_range());  // common practice
  EXPECT_TRUE(health.Check(At(3), 20.5).out_of_range());  // common practice
  EXPECT_EQ(health.Check(At(4), 20.5).faults, SensorCheck::kOutOfRange);  // common practice
}

TEST(SensorHealthTest, FlatlineAfterConfiguredRun) {
  SensorHealth health(Flatline(5, 0));
  for (int i = 0; i < 4; ++i) {
    EXPECT_FALSE(health.Check(At(i), 3.0).flatline());  // common practice: run of 1..4
  }
  EXPECT_TRUE(health.Check(At(4), 3.0).flatline());   // common practice: 5th sample, run 5
  EXPECT_TRUE(health.Check(At(5), 3.0).flatline());   // common practice: stays while flat
  EXPECT_EQ(health.flatline_run(), 6);                // common practice
  EXPECT_FALSE(health.Check(At(6), 3.5).flatline());  // common practice: a change ends it
  EXPECT_EQ(health.flatline_run(), 1);                // common practice: new run from 3.5
}

TEST(SensorHealthTest, FlatlineToleranceIsFromRunStart) {
  SensorHealth health(Flatline(5, 0.1));
  const std::array<double, 5> within = {1.00, 1.05, 1.09, 0.95, 0.92};  // within 0.1 of 1
  SensorCheck check;
  for (std::size_t i = 0; i < within.size(); ++i) {
    check = health.Check(At(static_cast<double>(i)), within[i]);
  }
  EXPECT_TRUE(check.flatline());  // common practice: noise below tolerance is still flat

  // A slow ramp moves 0.06 per sample: each step is within tolerance, but the distance
  // from the run's first value is not, so a ramp is never called flat.
  SensorHealth ramp(Flatline(3, 0.1));
  EXPECT_FALSE(ramp.Check(At(0), 1.00).flatline());  // common practice
  EXPECT_FALSE(ramp.Check(At(1), 1.06).flatline());  // common practice
  EXPECT_FALSE(ramp.Check(At(2), 1.12).flatline());  // common practice: 0.12 from 1.00
  EXPECT_EQ(ramp.flatline_run(), 1);                 // common practice: restarted at 1.12
}

TEST(SensorHealthTest, NotFiniteNeitherResetsNorExtendsFlatline) {
  SensorHealth health(Flatline(3, 0));
  ASSERT_FALSE(health.Check(At(0), 2.0).flatline());
  ASSERT_FALSE(health.Check(At(1), 2.0).flatline());
  SensorCheck nan_check = health.Check(At(2), kNaN);
  EXPECT_TRUE(nan_check.not_finite());               // common practice
  EXPECT_FALSE(nan_check.flatline());                // common practice: NaN does not extend the run
  EXPECT_EQ(health.flatline_run(), 2);               // common practice: nor reset it
  EXPECT_TRUE(health.Check(At(3), 2.0).flatline());  // common practice: third finite sample
  // Once flat, a NaN reports the run as it stands, so the flatline does not flicker.
  nan_check = health.Check(At(4), kNaN);
  EXPECT_EQ(nan_check.faults, SensorCheck::kNotFinite | SensorCheck::kFlatline);  // common practice
  EXPECT_TRUE(health.Check(At(5), 2.0).flatline());                               // common practice
}

TEST(SensorHealthTest, PinnedAtRailIsOutOfRangeAndFlat) {
  SensorHealthOptions options = Flatline(3, 0);
  options.max_value = 100;
  SensorHealth health(options);
  SensorCheck check;
  for (int i = 0; i < 3; ++i) check = health.Check(At(i), 104.0);
  EXPECT_TRUE(check.out_of_range());  // common practice
  EXPECT_TRUE(check.flatline());      // common practice
}

TEST(SensorHealthTest, FlatlineOffByDefault) {
  SensorHealth health;
  SensorCheck check;
  for (int i = 0; i < 1000; ++i) check = health.Check(At(i), 7.0);
  EXPECT_TRUE(check.ok());  // common practice: flatline_samples = 0 means off
}

TEST(SensorHealthTest, RepeatedTimestampsCountAsSamples) {
  // Documented: Check() ignores timestamp order; a repeated timestamp is a sample.
  SensorHealth health(Flatline(3, 0));
  ASSERT_FALSE(health.Check(At(0), 5.0).flatline());
  ASSERT_FALSE(health.Check(At(0), 5.0).flatline());
  EXPECT_TRUE(health.Check(At(0), 5.0).flatline());  // common practice (DESIGN-NOTES §6)
  EXPECT_EQ(health.last_sample_time(), At(0));       // common practice
}

TEST(SensorHealthTest, GapAfterConfiguredPeriods) {
  SensorHealth health;                            // gap_periods = 10
  EXPECT_FALSE(health.GapPresent(At(100), 1.0));  // common practice: nothing seen yet
  ASSERT_TRUE(health.Check(At(0), 1.0).ok());
  EXPECT_FALSE(health.GapPresent(At(5), 1.0));      // common practice
  EXPECT_FALSE(health.GapPresent(At(10), 1.0));     // common practice: exactly 10 is not longer
  EXPECT_TRUE(health.GapPresent(At(10) + 1, 1.0));  // common practice: longer than 10 periods
  EXPECT_FALSE(health.GapPresent(At(30), kNaN));    // common practice: period unknown
  EXPECT_FALSE(health.GapPresent(At(30), 0.0));     // common practice: period unknown
  // A backward timestamp is checked but does not move the gap clock back...
  ASSERT_TRUE(health.Check(At(-50), 1.0).ok());
  EXPECT_EQ(health.last_sample_time(), At(0));  // common practice (DESIGN-NOTES §6)
  EXPECT_TRUE(health.GapPresent(At(11), 1.0));  // common practice
  // ...while a NaN sample is an arrival: the link is alive, the value is the fault.
  ASSERT_TRUE(health.Check(At(11), kNaN).not_finite());
  EXPECT_FALSE(health.GapPresent(At(12), 1.0));  // common practice
}

TEST(SensorHealthTest, GapCheckOff) {
  SensorHealthOptions options;
  options.gap_periods = 0;
  SensorHealth health(options);
  ASSERT_TRUE(health.Check(At(0), 1.0).ok());
  EXPECT_FALSE(health.GapPresent(At(1e6), 1.0));  // common practice: 0 = off
}

TEST(SensorHealthTest, CheckNeverAllocates) {
  SensorHealthOptions options = Flatline(10, 0.01);
  options.min_value = 0;
  options.max_value = 1;
  SensorHealth health(options);
  nightjar::testing::AllocationCounter counter;
  for (int i = 0; i < 500; ++i) {
    (void)health.Check(At(i), (i % 7 == 0) ? kNaN : 0.001 * (i % 50));
    (void)health.GapPresent(At(i), 1.0);
  }
  EXPECT_EQ(counter.count(), 0U);  // common practice: STYLE.md, no heap on the sample path
}

}  // namespace
}  // namespace nightjar::core
