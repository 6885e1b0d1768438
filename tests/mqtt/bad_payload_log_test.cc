#include "mqtt/bad_payload_log.h"

#include <gtest/gtest.h>

#include <string>

namespace nightjar::mqtt {
namespace {

constexpr core::TimestampUs kSec = core::kMicrosPerSecond;

TEST(BadPayloadLogTest, FirstReportAtOnceThenAtMostOncePerInterval) {
  BadPayloadLog log(BadPayloadLogOptions{.interval_s = 60.0, .max_channels = 16});
  const std::string ch = "cw2.pump_a.flow";
  BadPayloadLog::Decision d = log.Record(ch, 1000 * kSec);
  EXPECT_TRUE(d.log_now);
  EXPECT_EQ(d.suppressed, 0u);
  EXPECT_EQ(d.total, 1u);
  // A storm of 500 bad payloads within the minute: not one more line.
  int lines = 0;
  for (int i = 1; i <= 500; ++i)
    lines += log.Record(ch, 1000 * kSec + core::TimestampUs{i} * 100'000).log_now;
  EXPECT_EQ(lines, 0);
  // 60 s after the first line: one line, carrying the 500 kept quiet.
  d = log.Record(ch, 1060 * kSec);
  EXPECT_TRUE(d.log_now);
  EXPECT_EQ(d.suppressed, 500u);
  EXPECT_EQ(d.total, 502u);
  d = log.Record(ch, 1061 * kSec);
  EXPECT_FALSE(d.log_now);
  EXPECT_EQ(log.count(ch), 503u);
  EXPECT_EQ(log.total(), 503u);
}

TEST(BadPayloadLogTest, ChannelsAreLimitedIndependently) {
  BadPayloadLog log(BadPayloadLogOptions{.interval_s = 10.0, .max_channels = 16});
  EXPECT_TRUE(log.Record("cw2.pump_a.flow", 0).log_now);
  EXPECT_TRUE(log.Record("cw2.pump_b.flow", 1 * kSec).log_now);
  EXPECT_FALSE(log.Record("cw2.pump_a.flow", 2 * kSec).log_now);
  EXPECT_FALSE(log.Record("cw2.pump_b.flow", 3 * kSec).log_now);
  EXPECT_TRUE(log.Record("cw2.pump_a.flow", 10 * kSec).log_now);
  EXPECT_FALSE(log.Record("cw2.pump_b.flow", 10 * kSec).log_now);
  EXPECT_TRUE(log.Record("cw2.pump_b.flow", 11 * kSec).log_now);
  const auto counts = log.Counts();
  ASSERT_EQ(counts.size(), 2u);
  EXPECT_EQ(counts[0], (std::pair<std::string, std::uint64_t>{"cw2.pump_a.flow", 3}));
  EXPECT_EQ(counts[1], (std::pair<std::string, std::uint64_t>{"cw2.pump_b.flow", 4}));
  EXPECT_EQ(log.count("cw2.pump_c.flow"), 0u);
}

TEST(BadPayloadLogTest, ClockSteppingBackNeitherFloodsNorSilences) {
  BadPayloadLog log(BadPayloadLogOptions{.interval_s = 60.0, .max_channels = 16});
  EXPECT_TRUE(log.Record("c", 1000 * kSec).log_now);
  // Time jumps back an hour: no line, the window restarts at the new time.
  EXPECT_FALSE(log.Record("c", -2600 * kSec).log_now);
  for (int i = 0; i < 50; ++i) EXPECT_FALSE(log.Record("c", -2600 * kSec + i * kSec).log_now);
  const BadPayloadLog::Decision d = log.Record("c", -2540 * kSec);
  EXPECT_TRUE(d.log_now);
  EXPECT_EQ(d.suppressed, 51u);
}

TEST(BadPayloadLogTest, TableIsBoundedAndTheRestShareOneKey) {
  BadPayloadLog log(BadPayloadLogOptions{.interval_s = 60.0, .max_channels = 3});
  for (int i = 0; i < 100; ++i) log.Record("junk." + std::to_string(i), i * kSec);
  const auto counts = log.Counts();
  ASSERT_EQ(counts.size(), 4u);  // three channels plus the shared key
  EXPECT_EQ(log.count(BadPayloadLog::kOtherChannels), 97u);
  EXPECT_EQ(log.count("junk.0"), 1u);
  EXPECT_EQ(log.count("junk.50"), 0u);
  EXPECT_EQ(log.total(), 100u);
}

TEST(BadPayloadLogTest, OptionsAreValidated) {
  EXPECT_TRUE(ValidateBadPayloadLogOptions({}).ok());
  EXPECT_EQ(ValidateBadPayloadLogOptions({.interval_s = 0.0, .max_channels = 1}).message(),
            "interval_s: must be finite and > 0, got 0.000000");
  EXPECT_EQ(ValidateBadPayloadLogOptions({.interval_s = 1.0, .max_channels = 0}).message(),
            "max_channels: must be >= 1, got 0");
}

}  // namespace
}  // namespace nightjar::mqtt
