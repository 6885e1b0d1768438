// Engine::Reconfigure and ResetChannel, what a config reload in the daemon relies on: a
// channel left alone keeps what it learnt, a reset channel learns again, and new channels
// get the new options. (Engine behaviour only; nothing computed here needs an outside
// reference: the checks are on states and counters, common practice.)
#include <gtest/gtest.h>

#include <string>
#include <vector>

#include "core/engine.h"

namespace nightjar::core {
namespace {

constexpr TimestampUs kStart = 1'780'000'000LL * kMicrosPerSecond;

EngineOptions Quick() {
  EngineOptions options;
  options.defaults.forecaster = Forecaster::kLastValue;
  options.defaults.warmup_samples = 200;
  options.defaults.scaler.warmup_samples = 20;
  options.defaults.sensor.flatline_samples = 0;
  options.defaults.anomaly_alarm.on_delay_s = 0.0;  // a short step raises at once
  return options;
}

void Feed(Engine& engine, ChannelId id, int from, int count, std::vector<Alert>& alerts) {
  for (int i = from; i < from + count; ++i) {
    engine.Process(id, kStart + i * kMicrosPerSecond, 10.0 + 0.1 * ((i * 7919) % 13), alerts);
  }
}

TEST(EngineReconfigureTest, ResetChannelLearnsAgainOthersKeepTheirState) {
  Engine engine(Quick());
  std::vector<Alert> alerts;
  const ChannelId a = *engine.AddChannel("cw2.pump_a.flow");
  const ChannelId b = *engine.AddChannel("cw2.pump_b.flow");
  Feed(engine, a, 0, 400, alerts);
  Feed(engine, b, 0, 400, alerts);
  ASSERT_EQ(engine.channel_status(a).state, ChannelState::kArmed);
  ASSERT_EQ(engine.channel_status(b).state, ChannelState::kArmed);

  ChannelOptions changed = Quick().defaults;
  changed.anomaly_priority = Priority::kHigh;
  ASSERT_TRUE(engine.ResetChannel(a, changed).ok());
  EXPECT_EQ(engine.channel_status(a).state, ChannelState::kLearning);
  EXPECT_EQ(engine.channel_status(a).samples, 0);
  EXPECT_EQ(engine.channel_options(a).anomaly_priority, Priority::kHigh);
  EXPECT_EQ(engine.channel_status(b).state, ChannelState::kArmed);
  EXPECT_EQ(engine.channel_status(b).samples, 400);

  ChannelOptions bad = changed;
  bad.predictor.window = 0;
  const Status rejected = engine.ResetChannel(b, bad);
  EXPECT_FALSE(rejected.ok());
  EXPECT_NE(rejected.message().find("window"), std::string::npos) << rejected.message();
  EXPECT_EQ(engine.channel_status(b).samples, 400);
}

// A reset must not leave a raise standing: every active alarm is cleared first, at the
// priority it was raised at, naming why; an alarm that is not active gets nothing.
TEST(EngineReconfigureTest, ResetChannelClearsItsActiveAlarmsFirst) {
  EngineOptions options = Quick();
  options.defaults.sample_period_s = 1.0;
  options.defaults.sensor.gap_periods = 3;
  Engine engine(options);
  std::vector<Alert> alerts;
  const ChannelId a = *engine.AddChannel("cw2.pump_a.flow");
  Feed(engine, a, 0, 400, alerts);
  // A 100-sigma step raises the anomaly alarm; then 10 s of silence the gap alarm.
  for (int i = 400; i < 405; ++i) engine.Process(a, kStart + i * kMicrosPerSecond, 50.0, alerts);
  engine.AdvanceClock(kStart + 415 * kMicrosPerSecond, alerts);
  ASSERT_TRUE(engine.channel(a).alarm(AlarmCondition::kAnomaly).active());
  ASSERT_TRUE(engine.channel(a).alarm(AlarmCondition::kGap).active());
  ASSERT_FALSE(engine.channel(a).alarm(AlarmCondition::kRange).active());

  ChannelOptions changed = options.defaults;
  changed.anomaly_priority = Priority::kHigh;
  ChannelOptions bad = changed;
  bad.predictor.window = 0;
  std::vector<Alert> clears;
  const TimestampUs now = kStart + 416 * kMicrosPerSecond;
  EXPECT_FALSE(engine.ResetChannel(a, bad, now, "reset for a test", clears).ok());
  EXPECT_TRUE(clears.empty()) << "invalid options: the channel is unchanged, nothing cleared";

  ASSERT_TRUE(engine.ResetChannel(a, changed, now, "reset for a test", clears).ok());
  ASSERT_EQ(clears.size(), 2u);
  EXPECT_EQ(clears[0].kind, AlertKind::kAnomaly);
  EXPECT_EQ(clears[0].priority, Priority::kMedium) << "the priority it was raised at";
  EXPECT_EQ(clears[1].kind, AlertKind::kSensor);
  EXPECT_EQ(clears[1].detector, Detector::kGap);
  for (const Alert& clear : clears) {
    EXPECT_EQ(clear.phase, AlertPhase::kClear);
    EXPECT_EQ(clear.time, now);
    EXPECT_EQ(clear.channel, "cw2.pump_a.flow");
    EXPECT_NE(clear.message.find("alarm cleared: reset for a test"), std::string::npos)
        << clear.message;
  }
  EXPECT_EQ(engine.channel_status(a).state, ChannelState::kLearning);
  EXPECT_FALSE(engine.channel(a).alarm(AlarmCondition::kAnomaly).active());
}

TEST(EngineReconfigureTest, NewChannelsGetTheNewOptions) {
  Engine engine(Quick());
  EngineOptions next = Quick();
  next.defaults.unit = "bar(g)";
  engine.Reconfigure(next, {});
  const ChannelId c = *engine.AddChannel("cw2.pump_a.discharge_pressure");
  EXPECT_EQ(engine.channel_options(c).unit, "bar(g)");
}

}  // namespace
}  // namespace nightjar::core
