#include "mqtt/sample_intake.h"

#include <gtest/gtest.h>

#include <string>
#include <vector>

#include "fakes/fake_bus.h"

namespace nightjar::mqtt {
namespace {

constexpr core::TimestampUs kSec = core::kMicrosPerSecond;

struct Got {
  std::string channel;
  core::TimestampUs time;
  double value;
};
struct Problem {
  std::string key;
  std::string message;
  std::uint64_t suppressed;
};

class SampleIntakeTest : public ::testing::Test {
 protected:
  std::unique_ptr<SampleIntake> MakeIntake(IntakeOptions options) {
    core::Result<std::unique_ptr<SampleIntake>> intake = SampleIntake::Create(
        std::move(options), [this] { return now_; },
        [this](std::string_view channel, core::TimestampUs time, double value) {
          samples_.push_back(Got{std::string(channel), time, value});
        },
        [this](std::string_view key, const core::Status& problem, std::uint64_t suppressed) {
          problems_.push_back(Problem{std::string(key), problem.message(), suppressed});
        });
    EXPECT_TRUE(intake.ok()) << intake.status().message();
    return intake.ok() ? std::move(intake).value() : nullptr;
  }

  static IntakeOptions Cw2Rules() {
    PayloadFormat json;
    json.encoding = PayloadEncoding::kJson;
    json.value_field = "v";
    json.time_field = "t";
    json.time_encoding = TimeEncoding::kEpochMillis;
    IntakeOptions options;
    // Specific before general: the gateway's JSON topics, then plain numbers.
    options.rules.push_back(IntakeRule{.topic = "brackwater/{area}/gateway/{signal}",
                                       .channel = "{area}.gateway.{signal}",
                                       .payload = json,
                                       .qos = 1});
    options.rules.push_back(IntakeRule{.topic = "brackwater/{area}/{asset}/{signal}",
                                       .channel = "{area}.{asset}.{signal}",
                                       .payload = {},
                                       .qos = 0});
    options.rules.push_back(IntakeRule{.topic = "brackwater/{area}/{asset}/{signal}",
                                       .channel = "{area}.{asset}.{signal}.copy",
                                       .payload = {},
                                       .qos = 1});
    options.bad_payload_log.interval_s = 60.0;
    return options;
  }

  core::TimestampUs now_ = 1773053674 * kSec;
  std::vector<Got> samples_;
  std::vector<Problem> problems_;
};

TEST_F(SampleIntakeTest, AttachSubscribesEachFilterOnceAtTheHighestQos) {
  auto intake = MakeIntake(Cw2Rules());
  testing::FakeBus bus;
  ASSERT_TRUE(intake->Attach(bus).ok());
  const auto subs = bus.subscriptions();
  ASSERT_EQ(subs.size(), 2u);
  EXPECT_EQ(subs[0].filter, "brackwater/+/gateway/+");
  EXPECT_EQ(subs[0].qos, 1);
  EXPECT_EQ(subs[1].filter, "brackwater/+/+/+");
  EXPECT_EQ(subs[1].qos, 1);
}

TEST_F(SampleIntakeTest, MessagesBecomeSamplesByTheFirstFittingRule) {
  auto intake = MakeIntake(Cw2Rules());
  testing::FakeBus bus;
  ASSERT_TRUE(intake->Attach(bus).ok());
  ASSERT_TRUE(bus.Start().ok());
  EXPECT_TRUE(bus.Deliver("brackwater/cw2/pump_a/flow", "41.5"));
  EXPECT_TRUE(
      bus.Deliver("brackwater/cw2/gateway/inlet_temp", R"({"v": 18.25, "t": 1773053600000})"));
  EXPECT_FALSE(bus.Deliver("millpond/cw2/pump_a/flow", "1"));  // not subscribed: never arrives
  ASSERT_EQ(samples_.size(), 2u);
  EXPECT_EQ(samples_[0].channel, "cw2.pump_a.flow");
  EXPECT_EQ(samples_[0].time, now_);
  EXPECT_EQ(samples_[0].value, 41.5);
  EXPECT_EQ(samples_[1].channel, "cw2.gateway.inlet_temp");
  EXPECT_EQ(samples_[1].time, 1773053600000 * 1000);
  EXPECT_EQ(samples_[1].value, 18.25);
  const IntakeStats stats = intake->stats();
  EXPECT_EQ(stats.messages, 2u);
  EXPECT_EQ(stats.samples, 2u);
  EXPECT_TRUE(problems_.empty());
}

TEST_F(SampleIntakeTest, BadPayloadsAreCountedPerChannelAndReportedRateLimited) {
  auto intake = MakeIntake(Cw2Rules());
  testing::FakeBus bus;
  ASSERT_TRUE(intake->Attach(bus).ok());
  ASSERT_TRUE(bus.Start().ok());
  for (int i = 0; i < 300; ++i) {  // a broken sensor: 300 bad payloads in 30 s
    now_ += 100'000;
    bus.Deliver("brackwater/cw2/pump_a/flow", "ERR");
  }
  bus.Deliver("brackwater/cw2/gateway/inlet_temp", R"({"t": 1})");
  bus.Deliver("brackwater/cw2/pump_b/flow", "7");
  now_ += 60 * kSec;
  bus.Deliver("brackwater/cw2/pump_a/flow", "still ERR");

  ASSERT_EQ(problems_.size(), 3u);
  EXPECT_EQ(problems_[0].key, "cw2.pump_a.flow");
  EXPECT_EQ(problems_[0].message,
            "topic brackwater/cw2/pump_a/flow: payload 'ERR' is not a number");
  EXPECT_EQ(problems_[0].suppressed, 0u);
  EXPECT_EQ(problems_[1].key, "cw2.gateway.inlet_temp");
  EXPECT_EQ(problems_[1].message, "topic brackwater/cw2/gateway/inlet_temp: field 'v' missing");
  EXPECT_EQ(problems_[2].key, "cw2.pump_a.flow");
  EXPECT_EQ(problems_[2].message,
            "topic brackwater/cw2/pump_a/flow: payload 'still ERR' is not a number");
  EXPECT_EQ(problems_[2].suppressed, 299u);

  const IntakeStats stats = intake->stats();
  EXPECT_EQ(stats.bad_payloads, 302u);
  EXPECT_EQ(stats.samples, 1u);
  ASSERT_EQ(stats.bad_payloads_by_channel.size(), 2u);
  EXPECT_EQ(stats.bad_payloads_by_channel[0].first, "cw2.gateway.inlet_temp");
  EXPECT_EQ(stats.bad_payloads_by_channel[0].second, 1u);
  EXPECT_EQ(stats.bad_payloads_by_channel[1].first, "cw2.pump_a.flow");
  EXPECT_EQ(stats.bad_payloads_by_channel[1].second, 301u);
}

TEST_F(SampleIntakeTest, UnmappableTopicsAreCountedNotSampled) {
  auto intake = MakeIntake(Cw2Rules());
  intake->OnMessage("brackwater/cw2/pump.a/flow", "1");  // '.' would split the channel
  intake->OnMessage("brackwater/cw2/flow", "1");         // fits no rule
  ASSERT_EQ(problems_.size(), 1u);  // one report per minute for all unmapped topics
  EXPECT_EQ(problems_[0].key, SampleIntake::kUnmappedKey);
  EXPECT_EQ(problems_[0].message,
            "topic brackwater/cw2/pump.a/flow: level 3 ({asset} = 'pump.a') contains '.', which "
            "would split the channel name");
  EXPECT_TRUE(samples_.empty());
  EXPECT_EQ(intake->stats().unmapped, 2u);
}

TEST_F(SampleIntakeTest, CreateNamesTheBadRule) {
  IntakeOptions options = Cw2Rules();
  options.rules[1].channel = "{area}.{signal}";
  auto bad = SampleIntake::Create(
      options, [] { return 0; }, [](auto, auto, auto) {}, {});
  ASSERT_FALSE(bad.ok());
  EXPECT_EQ(bad.status().message().rfind("rules[1].topic/channel: channel template", 0), 0u)
      << bad.status().message();

  options = Cw2Rules();
  options.rules[0].payload.value_field = "";
  bad = SampleIntake::Create(
      options, [] { return 0; }, [](auto, auto, auto) {}, {});
  ASSERT_FALSE(bad.ok());
  EXPECT_EQ(bad.status().message(), "rules[0].payload.value_field: empty");

  options = Cw2Rules();
  options.rules[2].qos = 3;
  bad = SampleIntake::Create(
      options, [] { return 0; }, [](auto, auto, auto) {}, {});
  ASSERT_FALSE(bad.ok());
  EXPECT_EQ(bad.status().message(), "rules[2].qos: must be 0, 1 or 2, got 3");

  bad = SampleIntake::Create(
      IntakeOptions{}, [] { return 0; }, [](auto, auto, auto) {}, {});
  ASSERT_FALSE(bad.ok());
  EXPECT_EQ(bad.status().message(), "rules: none given");
}

TEST(FakeBusTest, HoldsQos1WhileDisconnectedAndReleasesInOrder) {
  testing::FakeBus bus(/*connect_on_start=*/false);
  std::vector<bool> changes;
  bus.SetConnectionHandler([&changes](bool up) { changes.push_back(up); });
  ASSERT_TRUE(bus.Start().ok());
  EXPECT_TRUE(bus.Publish("brackwater/cw2/nightjar/alerts", "a", 1, false).ok());
  EXPECT_TRUE(bus.Publish("brackwater/cw2/nightjar/alerts", "b", 1, false).ok());
  EXPECT_EQ(bus.Publish("brackwater/cw2/nightjar/alerts", "c", 0, false).code(),
            core::StatusCode::kUnavailable);
  EXPECT_TRUE(bus.published().empty());
  EXPECT_EQ(bus.stats().outbox_size, 2u);
  bus.SetConnected(true);
  const auto published = bus.published();
  ASSERT_EQ(published.size(), 2u);
  EXPECT_EQ(published[0].payload, "a");
  EXPECT_EQ(published[1].payload, "b");
  bus.Stop();
  EXPECT_EQ(changes, (std::vector<bool>{true, false}));
  EXPECT_EQ(bus.stats().publish_dropped, 1u);
}

}  // namespace
}  // namespace nightjar::mqtt
