// Static mean +- k sigma limits baseline.
//
// Mean and sample standard deviation are the textbook definitions (common practice:
// s^2 = sum (x - mean)^2 / (n - 1)); every number below is worked by hand in the comment
// beside it. The raise/clear timing is core::Alarm's (on/off delay, deadband), tested in
// tests/core/alarm_test.cc; here we check that the baseline drives it with the right ratio.
#include "replay/static_limits_baseline.h"

#include <gtest/gtest.h>

#include <cmath>
#include <limits>
#include <string>
#include <vector>

#include "replay/event_scoring.h"

namespace nightjar::replay {
namespace {

constexpr core::TimestampUs kUs = core::kMicrosPerSecond;
constexpr core::TimestampUs kDay = 1773014400 * kUs;  // 2026-03-09T00:00:00Z

core::TimestampUs At(double seconds) { return kDay + core::FromSeconds(seconds); }

// Raise at once, clear at once, no deadband: the band itself decides.
constexpr core::AlarmTiming kImmediate{.on_delay_s = 0, .off_delay_s = 0, .deadband = 0};

// Feeds `values` at 1 s spacing from `start_s`; returns the edges.
std::vector<BaselineEdge> Feed(StaticLimitsBaseline& baseline, const std::string& channel,
                               const std::vector<double>& values, double start_s) {
  std::vector<BaselineEdge> edges;
  for (std::size_t i = 0; i < values.size(); ++i) {
    baseline.Process(channel, At(start_s + static_cast<double>(i)), values[i], edges);
  }
  return edges;
}

TEST(StaticLimitsBaselineTest, LearnsMeanAndSampleSigmaOverTheWarmUp) {
  // Warm-up 1, 2, 3, 4: mean 2.5; squared deviations 2.25 + 0.25 + 0.25 + 2.25 = 5;
  // s^2 = 5 / 3, s = 1.2909944487; k = 3: 2.5 -+ 3.8729833462 = [-1.3729833462, 6.3729833462].
  StaticLimitsBaseline baseline(4, 3.0, kImmediate);
  EXPECT_FALSE(baseline.limits("c").has_value());  // never seen
  Feed(baseline, "c", {1, 2, 3}, 0);
  EXPECT_FALSE(baseline.limits("c").has_value());  // still learning
  Feed(baseline, "c", {4}, 3);
  std::optional<StaticLimits> limits = baseline.limits("c");
  ASSERT_TRUE(limits.has_value());
  EXPECT_NEAR(limits->mean, 2.5, 1e-12);
  EXPECT_NEAR(limits->sigma, 1.2909944487358056, 1e-12);
  EXPECT_NEAR(limits->lower, -1.3729833462074170, 1e-12);
  EXPECT_NEAR(limits->upper, 6.3729833462074170, 1e-12);
}

TEST(StaticLimitsBaselineTest, RaisesOutsideTheBandAndClearsInside) {
  // Limits as above, [-1.373, 6.373], half-width 3.873.
  //  t=4: 3   -> ratio 0.5 / 3.873 = 0.129, inside
  //  t=5: 7   -> ratio 4.5 / 3.873 = 1.162, raise
  //  t=6: 6.5 -> ratio 1.033, still out
  //  t=7: 6   -> ratio 3.5 / 3.873 = 0.904, clear (no deadband, no off-delay)
  //  t=8: -2  -> ratio 4.5 / 3.873 = 1.162, raise (low side)
  StaticLimitsBaseline baseline(4, 3.0, kImmediate);
  std::vector<BaselineEdge> edges = Feed(baseline, "c", {1, 2, 3, 4, 3, 7, 6.5, 6, -2}, 0);
  ASSERT_EQ(edges.size(), 3u);
  EXPECT_EQ(edges[0].time, At(5));
  EXPECT_EQ(edges[0].phase, core::AlertPhase::kRaise);
  EXPECT_EQ(edges[0].channel, "c");
  EXPECT_DOUBLE_EQ(edges[0].value, 7.0);
  EXPECT_NEAR(edges[0].ratio, 4.5 / 3.8729833462074170, 1e-12);
  EXPECT_EQ(edges[1].time, At(7));
  EXPECT_EQ(edges[1].phase, core::AlertPhase::kClear);
  EXPECT_EQ(edges[2].time, At(8));
  EXPECT_EQ(edges[2].phase, core::AlertPhase::kRaise);
  EXPECT_TRUE(baseline.active("c"));
}

TEST(StaticLimitsBaselineTest, JustInsideAndJustOutsideTheLimit) {
  StaticLimitsBaseline baseline(4, 3.0, kImmediate);
  Feed(baseline, "c", {1, 2, 3, 4}, 0);
  const StaticLimits limits = *baseline.limits("c");
  std::vector<BaselineEdge> edges;
  baseline.Process("c", At(10), limits.upper - 1e-9, edges);
  EXPECT_TRUE(edges.empty());
  baseline.Process("c", At(11), limits.upper + 1e-9, edges);
  ASSERT_EQ(edges.size(), 1u);
  EXPECT_EQ(edges[0].phase, core::AlertPhase::kRaise);
}

TEST(StaticLimitsBaselineTest, EngineTimingHoldsTheClearForTheOffDelay) {
  // Engine anomaly timing without its on-delay (LimitBaselineTiming): off-delay 30 s,
  // deadband 0.2 (clear below ratio 0.8).
  //  t=4: 7   raise (ratio 1.162) on the first outlying sample
  //  t=5: 6   ratio 0.904 >= 0.8: inside the deadband, stays raised
  //  t=6..: 5 ratio 2.5 / 3.873 = 0.645 < 0.8: off-delay runs from t=6, clear at t=36.
  const core::ChannelOptions engine_defaults;
  const core::AlarmTiming timing = LimitBaselineTiming(engine_defaults);
  EXPECT_GT(engine_defaults.anomaly_alarm.on_delay_s, 0.0);
  EXPECT_EQ(timing.on_delay_s, 0.0);
  EXPECT_EQ(timing.off_delay_s, engine_defaults.anomaly_alarm.off_delay_s);
  EXPECT_EQ(timing.deadband, engine_defaults.anomaly_alarm.deadband);
  StaticLimitsBaseline baseline(4, 3.0, timing);
  std::vector<double> values = {1, 2, 3, 4, 7, 6};
  for (int i = 0; i < 40; ++i) values.push_back(5);
  std::vector<BaselineEdge> edges = Feed(baseline, "c", values, 0);
  ASSERT_EQ(edges.size(), 2u);
  EXPECT_EQ(edges[0].time, At(4));
  EXPECT_EQ(edges[0].phase, core::AlertPhase::kRaise);
  EXPECT_EQ(edges[1].time, At(36));
  EXPECT_EQ(edges[1].phase, core::AlertPhase::kClear);
}

TEST(StaticLimitsBaselineTest, WarmUpSamplesAreLearntNotJudged) {
  // A wild value inside the warm-up widens the band instead of raising:
  // 0, 0, 0, 100 -> mean 25, squared deviations 625 * 3 + 5625 = 7500, s^2 = 2500,
  // s = 50, k = 3: [-125, 175]. The next sample (100, ratio 75 / 150 = 0.5) stays quiet.
  StaticLimitsBaseline baseline(4, 3.0, kImmediate);
  std::vector<BaselineEdge> edges = Feed(baseline, "c", {0, 0, 0, 100, 100}, 0);
  EXPECT_TRUE(edges.empty());
  EXPECT_NEAR(baseline.limits("c")->sigma, 50.0, 1e-12);
  EXPECT_NEAR(baseline.limits("c")->upper, 175.0, 1e-12);
}

TEST(StaticLimitsBaselineTest, SkipsNonFiniteAndLateSamples) {
  // 1 @0, NaN @1, 2 @2, 100 @2 (repeated time), 50 @1 (earlier), 3 @3, inf @4, 4 @5:
  // learnt from 1, 2, 3, 4 only -> mean 2.5 as above; 4 samples skipped.
  StaticLimitsBaseline baseline(4, 3.0, kImmediate);
  std::vector<BaselineEdge> edges;
  const double nan = std::numeric_limits<double>::quiet_NaN();
  const double inf = std::numeric_limits<double>::infinity();
  baseline.Process("c", At(0), 1, edges);
  baseline.Process("c", At(1), nan, edges);
  baseline.Process("c", At(2), 2, edges);
  baseline.Process("c", At(2), 100, edges);
  baseline.Process("c", At(1), 50, edges);
  baseline.Process("c", At(3), 3, edges);
  baseline.Process("c", At(4), inf, edges);
  baseline.Process("c", At(5), 4, edges);
  EXPECT_EQ(baseline.skipped_samples(), 4);
  ASSERT_TRUE(baseline.limits("c").has_value());
  EXPECT_NEAR(baseline.limits("c")->mean, 2.5, 1e-12);
  EXPECT_TRUE(edges.empty());
}

TEST(StaticLimitsBaselineTest, ChannelsAreIndependent) {
  // "a" learns 1, 2, 3, 4 ([-1.37, 6.37]); "b" learns 10, 20, 30, 40 (mean 25,
  // s = 12.91, [-13.73, 63.73]). 50 is outside a's band and inside b's.
  StaticLimitsBaseline baseline(4, 3.0, kImmediate);
  std::vector<BaselineEdge> edges;
  for (int i = 0; i < 4; ++i) {
    baseline.Process("a", At(i), i + 1.0, edges);
    baseline.Process("b", At(i), 10.0 * (i + 1), edges);
  }
  baseline.Process("a", At(4), 50, edges);
  baseline.Process("b", At(4), 50, edges);
  ASSERT_EQ(edges.size(), 1u);
  EXPECT_EQ(edges[0].channel, "a");
  EXPECT_NEAR(baseline.limits("b")->upper, 25 + 3 * 12.909944487358056, 1e-9);
  EXPECT_TRUE(baseline.active("a"));
  EXPECT_FALSE(baseline.active("b"));
  EXPECT_FALSE(baseline.active("never"));
}

TEST(StaticLimitsBaselineTest, ConstantWarmUpGivesAZeroWidthBand) {
  StaticLimitsBaseline baseline(3, 3.0, kImmediate);
  std::vector<BaselineEdge> edges = Feed(baseline, "c", {5, 5, 5, 5, 5.01}, 0);
  EXPECT_EQ(baseline.limits("c")->sigma, 0.0);
  ASSERT_EQ(edges.size(), 1u);  // 5 again is inside; 5.01 is out
  EXPECT_EQ(edges[0].time, At(4));
  EXPECT_TRUE(std::isinf(edges[0].ratio));
}

TEST(StaticLimitsBaselineTest, EngineTermsAndName) {
  const core::ChannelOptions options;
  StaticLimitsBaseline baseline(options);
  EXPECT_EQ(baseline.warmup_samples(), options.warmup_samples);
  EXPECT_EQ(baseline.k(), 3.0);
  EXPECT_EQ(baseline.name(),
            "static \xC2\xB1"
            "3\xCF\x83");  // "static ±3σ"
  EXPECT_EQ(StaticLimitsBaseline(10, 2.5, kImmediate).name(),
            "static \xC2\xB1"
            "2.5\xCF\x83");
}

TEST(StaticLimitsBaselineTest, Validate) {
  EXPECT_TRUE(StaticLimitsBaseline::Validate(2, 3.0, {}).ok());
  struct Bad {
    int warmup;
    double k;
    core::AlarmTiming timing;
    const char* names;
  };
  const std::vector<Bad> bad = {
      {1, 3.0, {}, "warmup_samples"},
      {10, 0.0, {}, "k:"},
      {10, -1.0, {}, "k:"},
      {10, std::numeric_limits<double>::quiet_NaN(), {}, "k:"},
      {10, std::numeric_limits<double>::infinity(), {}, "k:"},
      {10, 3.0, {.deadband = 1.0}, "deadband"},
  };
  for (const Bad& b : bad) {
    const core::Status status = StaticLimitsBaseline::Validate(b.warmup, b.k, b.timing);
    EXPECT_EQ(status.code(), core::StatusCode::kInvalidArgument) << b.names;
    EXPECT_NE(status.message().find(b.names), std::string::npos) << status.message();
  }
}

TEST(StaticLimitsBaselineTest, EdgesFeedEventScoring) {
  // A step from 2.5 to 20 at t=10 s inside the anomaly window [10, 20] s: the raise at 10
  // finds the window with delay 0; recall 1/1, precision 1/1.
  StaticLimitsBaseline baseline(4, 3.0, kImmediate);
  std::vector<double> values = {1, 2, 3, 4, 2, 3, 2, 3, 2, 3};
  for (int i = 0; i < 5; ++i) values.push_back(20);
  std::vector<BaselineEdge> edges = Feed(baseline, "c", values, 0);
  const std::vector<LabelWindow> windows = {{At(10), At(20), "anomaly"}};
  const std::vector<Raise> raises = RaisesOf(edges);
  const EventScores scores = ScoreEvents(raises, windows, 86400);
  EXPECT_EQ(scores.detected, 1);
  EXPECT_EQ(scores.false_alarms, 0);
  EXPECT_DOUBLE_EQ(scores.outcomes[0].delay_s, 0.0);
}

}  // namespace
}  // namespace nightjar::replay
