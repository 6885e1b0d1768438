// ReportTrace keeps a long trace in bounded memory for the report page while the value
// extremes and ratio peaks survive (min/max per bucket is common practice for drawing
// long series on screens a few thousand pixels wide).
#include "replay/report_trace.h"

#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <string>
#include <vector>

namespace nightjar::replay {
namespace {

constexpr core::TimestampUs kUs = core::kMicrosPerSecond;

TracePoint Point(std::size_t channel, std::int64_t second, double value, double ratio) {
  return TracePoint{.time = second * kUs,
                    .channel = channel,
                    .channel_name = {},
                    .value = value,
                    .expected = value - 0.5,
                    .residual_sigma = 0.1,
                    .ratio = ratio,
                    .detector = core::Detector::kCusum,
                    .state = core::ChannelState::kArmed,
                    .used = true};
}

TEST(ReportTraceTest, ADayAtOneHertzStaysWithinTheBucketBound) {
  ReportTrace trace(500);
  for (std::int64_t s = 0; s < 86400; ++s) {
    const double value =
        s == 40000 ? 99.0 : (s == 50000 ? -99.0 : std::sin(0.001 * static_cast<double>(s)));
    trace.Add(Point(0, s, value, s == 60000 ? 7.5 : 0.2));
    ASSERT_LE(trace.bucket_count(0), 1000u) << "at second " << s;
  }
  EXPECT_GE(trace.bucket_count(0), 500u) << "halving keeps at least half the bound";
  EXPECT_EQ(trace.bucket_width(0), 128 * kUs) << "86400 s / 2^k <= 1000 buckets: k = 7";

  const std::vector<std::string> names = {"a"};
  const std::vector<ReportChannel> channels = trace.Channels(names);
  ASSERT_EQ(channels.size(), 1u);
  const ReportChannel& a = channels[0];
  EXPECT_EQ(a.name, "a");
  EXPECT_LE(a.times.size(), 2000u);
  EXPECT_TRUE(std::is_sorted(a.times.begin(), a.times.end()));
  EXPECT_EQ(a.value.size(), a.times.size());
  EXPECT_EQ(a.ratio.size(), a.times.size());
  EXPECT_DOUBLE_EQ(*std::max_element(a.value.begin(), a.value.end()), 99.0);
  EXPECT_DOUBLE_EQ(*std::min_element(a.value.begin(), a.value.end()), -99.0);
  EXPECT_DOUBLE_EQ(*std::max_element(a.ratio.begin(), a.ratio.end()), 7.5);
  const auto spike = std::find(a.value.begin(), a.value.end(), 99.0);
  const auto at = static_cast<std::size_t>(spike - a.value.begin());
  EXPECT_EQ(a.times[at], 40000 * kUs) << "the extreme keeps its own time";
  EXPECT_DOUBLE_EQ(a.expected[at], 98.5);
  EXPECT_DOUBLE_EQ(a.band[at], 0.3) << "3 residual sigma";
}

TEST(ReportTraceTest, LearningHasNoForecastAndUnusedSamplesAreLeftOut) {
  ReportTrace trace;
  TracePoint learning = Point(1, 0, 5.0, 0.0);
  learning.state = core::ChannelState::kLearning;
  trace.Add(learning);
  TracePoint rejected = Point(1, 10, 1e9, 0.0);
  rejected.used = false;
  trace.Add(rejected);
  trace.Add(Point(1, 20, 6.0, 0.4));

  const std::vector<std::string> names = {"silent", "b"};
  const std::vector<ReportChannel> channels = trace.Channels(names);
  ASSERT_EQ(channels.size(), 2u);
  EXPECT_TRUE(channels[0].times.empty()) << "a column without samples";
  const ReportChannel& b = channels[1];
  ASSERT_EQ(b.times.size(), 2u);
  EXPECT_TRUE(std::isnan(b.expected[0]));
  EXPECT_TRUE(std::isnan(b.band[0]));
  EXPECT_TRUE(std::isnan(b.ratio[0]));
  EXPECT_DOUBLE_EQ(b.value[1], 6.0);
  EXPECT_DOUBLE_EQ(b.ratio[1], 0.4);
  EXPECT_EQ(std::count(b.value.begin(), b.value.end(), 1e9), 0);
}

}  // namespace
}  // namespace nightjar::replay
