// What a channel does when its stream resumes after a hole (ResumeOptions): anomaly alarms
// wait resume.hold_samples while the recurrent state warms up and the level is compared
// with the learnt one; at the learnt operating point the channel stays armed and a fault
// present since the resume still raises right after the wait; at an operating point it
// never learnt (DESIGN-NOTES §1: plants run at other loads from one run to the next) it
// re-learns its scales, keeping its model, and arms again, when the hole was longer than
// resume.relearn_after_s (an hour); after a shorter one the far-off level raises. The
// 5-standard-deviation rule and the 60-sample wait are the engine's own defaults (common practice:
// beyond the usual 3-sigma control limits with margin; a recurrent state settles within tens of
// samples).
#include <gtest/gtest.h>

#include <cmath>
#include <memory>
#include <numbers>
#include <random>
#include <string>
#include <vector>

#include "core/engine.h"

namespace nightjar::core {
namespace {

constexpr TimestampUs kStart = 1'780'000'000LL * kMicrosPerSecond;
constexpr char kName[] = "cw2.pump_a.flow";
constexpr int kLearnt = 900;   // samples before the checkpoint (armed at 600)
constexpr int kLater = 7200;   // the stream resumes two hours after the checkpoint
constexpr int kHold = 60;      // ResumeOptions default
constexpr int kRelearn = 512;  // ResumeOptions default

TimestampUs At(int i) { return kStart + static_cast<TimestampUs>(i) * kMicrosPerSecond; }

EngineOptions SmallModel() {
  EngineOptions options;
  options.defaults.unit = "m3/h";
  options.defaults.warmup_samples = 600;
  options.defaults.sample_period_s = 1.0;
  options.defaults.predictor.hidden_size = 8;
  options.defaults.predictor.window = 8;
  options.defaults.time_of_day_features = false;
  options.defaults.anomaly_alarm.on_delay_s = 0.0;  // raises are counted sample by sample
  return options;
}

// The flow around `level` with noise of `noise` m3/h; the learnt operating point is 50.
double Flow(int i, double level = 50.0, double noise = 0.3) {
  std::mt19937_64 rng(static_cast<std::uint64_t>(i) * 7919u + 3u);
  std::normal_distribution<double> gauss(0.0, 1.0);
  return level + 5.0 * std::sin(2.0 * std::numbers::pi * i / 300.0) * level / 50.0 +
         noise * gauss(rng);
}

std::vector<int> AnomalyRaises(const std::vector<Alert>& alerts, int first_index) {
  std::vector<int> at;
  for (const Alert& a : alerts) {
    if (a.kind == AlertKind::kAnomaly && a.phase == AlertPhase::kRaise) {
      at.push_back(static_cast<int>((a.time - At(first_index)) / kMicrosPerSecond));
    }
  }
  return at;
}

// A checkpoint of the flow channel after kLearnt samples at the learnt operating point.
std::vector<std::uint8_t> LearntCheckpoint(const EngineOptions& options = SmallModel()) {
  Engine engine(options);
  const ChannelId id = *engine.AddChannel(kName);
  std::vector<Alert> alerts;
  for (int i = 0; i < kLearnt; ++i) engine.Process(id, At(i), Flow(i), alerts);
  EXPECT_EQ(engine.channel_status(id).state, ChannelState::kArmed);
  std::vector<std::uint8_t> bytes;
  engine.SaveChannel(id, bytes);
  return bytes;
}

struct Restarted {
  Engine engine;
  ChannelId id = 0;
  Restarted(const std::vector<std::uint8_t>& bytes, const EngineOptions& options = SmallModel())
      : engine(options) {
    EXPECT_TRUE(engine.LoadChannel(kName, bytes).ok());
    id = *engine.FindChannel(kName);
  }
  // Feeds resumed samples [from, to) (indices counted from the resume).
  template <typename Value>
  void Feed(int from, int to, Value value, std::vector<Alert>& alerts) {
    for (int k = from; k < to; ++k) {
      engine.Process(id, At(kLearnt + kLater + k), value(kLearnt + k, k), alerts);
    }
  }
};

TEST(EngineResumeTest, AtTheLearntLevelAFaultPresentSinceTheResumeRaisesRightAfterTheWait) {
  const std::vector<std::uint8_t> bytes = LearntCheckpoint();
  Restarted restarted(bytes);
  std::vector<Alert> alerts;
  // A bearing gone rough while nightjar was down: the same level, six times the noise.
  restarted.Feed(
      0, 200, [](int i, int) { return Flow(i, 50.0, 1.8); }, alerts);
  const std::vector<int> raises = AnomalyRaises(alerts, kLearnt + kLater);
  ASSERT_FALSE(raises.empty()) << "a fault present from the start must still be caught";
  EXPECT_GE(raises.front(), kHold - 1) << "no anomaly raise inside the wait";
  EXPECT_LE(raises.front(), kHold + 10) << "the charts ran through the wait";
  const ChannelStatus status = restarted.engine.channel_status(restarted.id);
  EXPECT_EQ(status.relearns, 0);
  EXPECT_FALSE(status.relearning);
}

TEST(EngineResumeTest, AStartUpGlitchInsideTheWaitRaisesNothingButTheSameGlitchLaterDoes) {
  const std::vector<std::uint8_t> bytes = LearntCheckpoint();
  const auto glitch_at = [](int at) {
    return [at](int i, int k) { return Flow(i) + (k == at ? 15.0 : 0.0); };
  };
  std::vector<Alert> early;
  Restarted restarted(bytes);
  restarted.Feed(0, 200, glitch_at(10), early);
  EXPECT_TRUE(AnomalyRaises(early, kLearnt + kLater).empty());
  EXPECT_EQ(restarted.engine.channel_status(restarted.id).state, ChannelState::kArmed);

  std::vector<Alert> late;
  Restarted again(bytes);
  again.Feed(0, 200, glitch_at(120), late);
  const std::vector<int> raises = AnomalyRaises(late, kLearnt + kLater);
  ASSERT_EQ(raises.size(), 1u) << "the premise: the glitch is an anomaly when armed";
  EXPECT_EQ(raises.front(), 120);
}

TEST(EngineResumeTest, ANewOperatingPointIsRelearntInsteadOfAlarmedAndTheChannelArmsAgain) {
  const std::vector<std::uint8_t> bytes = LearntCheckpoint();
  // Restarted at a third of the flow, where the flow is also noisier.
  const auto low_flow = [](int i, int) { return Flow(i, 17.0, 0.9); };

  // The premise, without the level check: the restored model alarms at the new level.
  EngineOptions unchecked = SmallModel();
  unchecked.defaults.resume.hold_samples = 0;
  Restarted blind(bytes, unchecked);
  std::vector<Alert> blind_alerts;
  blind.Feed(0, kHold + kRelearn + 300, low_flow, blind_alerts);
  EXPECT_FALSE(AnomalyRaises(blind_alerts, kLearnt + kLater).empty());

  Restarted restarted(bytes);
  std::vector<Alert> alerts;
  restarted.Feed(0, kHold + 1, low_flow, alerts);
  ChannelStatus status = restarted.engine.channel_status(restarted.id);
  EXPECT_EQ(status.state, ChannelState::kLearning);
  EXPECT_TRUE(status.relearning);
  EXPECT_EQ(status.relearns, 1);
  restarted.Feed(kHold + 1, kHold + kRelearn + 300, low_flow, alerts);
  EXPECT_TRUE(AnomalyRaises(alerts, kLearnt + kLater).empty());
  status = restarted.engine.channel_status(restarted.id);
  EXPECT_EQ(status.state, ChannelState::kArmed) << "armed again after relearn_samples";
  EXPECT_FALSE(status.relearning);
  EXPECT_EQ(status.relearns, 1);

  // Armed at the new level, it watches it: the same rough-bearing fault raises.
  std::vector<Alert> fault;
  const int from = kHold + kRelearn + 300;
  restarted.Feed(
      from, from + 100, [](int i, int) { return Flow(i, 17.0, 5.0); }, fault);
  EXPECT_FALSE(AnomalyRaises(fault, kLearnt + kLater).empty());
}

// A short hole (five minutes, under resume.relearn_after_s) is no reason to believe the
// plant moved: the same far-off level that a restart an hour later re-learns (above) is a
// fault that started while the recorder paused, and it raises right after the wait.
TEST(EngineResumeTest, AfterAShortHoleAFarOffLevelRaisesInsteadOfBeingRelearnt) {
  Engine engine(SmallModel());
  const ChannelId id = *engine.AddChannel(kName);
  std::vector<Alert> alerts;
  for (int i = 0; i < kLearnt; ++i) engine.Process(id, At(i), Flow(i), alerts);
  ASSERT_EQ(engine.channel_status(id).state, ChannelState::kArmed);
  constexpr int kShortHole = 300;
  static_assert(kShortHole < 3600, "shorter than the default resume.relearn_after_s");
  std::vector<Alert> after;
  for (int k = 0; k < kHold + 100; ++k) {
    engine.Process(id, At(kLearnt + kShortHole + k), Flow(kLearnt + k, 17.0, 0.9), after);
  }
  const std::vector<int> raises = AnomalyRaises(after, kLearnt + kShortHole);
  ASSERT_FALSE(raises.empty()) << "a level far off after a short hole is an anomaly";
  EXPECT_GE(raises.front(), kHold - 1) << "no anomaly raise inside the wait";
  EXPECT_LE(raises.front(), kHold + 10);
  EXPECT_EQ(engine.channel_status(id).relearns, 0);
  EXPECT_FALSE(engine.channel_status(id).relearning);
}

TEST(EngineResumeTest, AnAlarmFromBeforeTheHoleIsWithdrawnWithAClearWhenTheChannelRelearns) {
  Engine engine(SmallModel());
  const ChannelId id = *engine.AddChannel(kName);
  std::vector<Alert> alerts;
  for (int i = 0; i < kLearnt; ++i) engine.Process(id, At(i), Flow(i), alerts);
  for (int i = kLearnt; i < kLearnt + 40; ++i) engine.Process(id, At(i), Flow(i, 50, 3.0), alerts);
  ASSERT_EQ(engine.channel_status(id).state, ChannelState::kInAlarm);
  std::vector<std::uint8_t> bytes;
  engine.SaveChannel(id, bytes);

  Restarted restarted(bytes);
  std::vector<Alert> resumed;
  restarted.Feed(
      0, kHold + 5, [](int i, int) { return Flow(i, 17.0, 0.9); }, resumed);
  int clears = 0;
  for (const Alert& a : resumed) {
    if (a.kind != AlertKind::kAnomaly) continue;
    ASSERT_EQ(a.phase, AlertPhase::kClear) << a.message;
    ++clears;
    EXPECT_NE(a.message.find("re-learning"), std::string::npos) << a.message;
  }
  EXPECT_EQ(clears, 1);
  EXPECT_EQ(restarted.engine.channel_status(restarted.id).state, ChannelState::kLearning);
}

TEST(EngineResumeTest, ARelearningChannelCheckpointedMidwayStillArmsAfterRelearnSamples) {
  const std::vector<std::uint8_t> bytes = LearntCheckpoint();
  const auto low_flow = [](int i, int) { return Flow(i, 17.0, 0.9); };
  Restarted restarted(bytes);
  std::vector<Alert> alerts;
  restarted.Feed(0, kHold + 200, low_flow, alerts);
  ASSERT_TRUE(restarted.engine.channel_status(restarted.id).relearning);
  std::vector<std::uint8_t> midway;
  restarted.engine.SaveChannel(restarted.id, midway);

  // Loaded again and fed on without a hole: it keeps counting towards relearn_samples (512),
  // not towards warmup_samples (600) from zero.
  Engine reloaded(SmallModel());
  ASSERT_TRUE(reloaded.LoadChannel(kName, midway).ok());
  const ChannelId id = *reloaded.FindChannel(kName);
  EXPECT_TRUE(reloaded.channel_status(id).relearning);
  for (int k = kHold + 200; k < kHold + kRelearn + 20; ++k) {
    reloaded.Process(id, At(kLearnt + kLater + k), low_flow(kLearnt + k, k), alerts);
  }
  EXPECT_EQ(reloaded.channel_status(id).state, ChannelState::kArmed);
  EXPECT_EQ(reloaded.channel_status(id).relearns, 1);
}

// An operating point is the asset's (DESIGN-NOTES §1, §4): pump A restarted at a third of
// its flow also draws 4.2 A less current, but that is only about 4 of the current's learnt
// standard deviations (0.93 A), under the 5 of the level check. The flow re-learns on its own
// check; the current re-learns with it instead of alarming on the old model. Pump B, another asset
// restarted at the same moment with the same moved current, keeps its own verdict.
double Current(int i, double level) {
  std::mt19937_64 rng(static_cast<std::uint64_t>(i) * 104729u + 11u);
  std::normal_distribution<double> gauss(0.0, 1.0);
  return level + std::sin(2.0 * std::numbers::pi * i / 300.0) + 0.6 * gauss(rng);
}

struct PumpTrain {
  std::vector<std::string> names{"cw2.pump_a.flow", "cw2.pump_a.motor_current",
                                 "cw2.pump_b.motor_current"};
  std::vector<std::vector<std::uint8_t>> checkpoints;
  PumpTrain() {
    Engine engine(SmallModel());
    std::vector<Alert> alerts;
    for (int i = 0; i < kLearnt; ++i) {
      engine.Process({names[0], At(i), Flow(i)}, alerts);
      engine.Process({names[1], At(i), Current(i, 40.0)}, alerts);
      engine.Process({names[2], At(i), Current(i, 40.0)}, alerts);
    }
    for (const std::string& name : names) {
      const ChannelId id = *engine.FindChannel(name);
      EXPECT_EQ(engine.channel_status(id).state, ChannelState::kArmed) << name;
      checkpoints.emplace_back();
      engine.SaveChannel(id, checkpoints.back());
    }
  }
  // Restores all three and resumes them two hours later, pump A at a third of its flow
  // and both currents 4.2 A lower; returns the anomaly raises per channel.
  std::vector<std::vector<int>> Resume(std::unique_ptr<Engine>& engine, int samples) const {
    for (std::size_t c = 0; c < names.size(); ++c) {
      EXPECT_TRUE(engine->LoadChannel(names[c], checkpoints[c]).ok());
    }
    std::vector<std::vector<Alert>> alerts(names.size());
    for (int k = 0; k < samples; ++k) {
      const int i = kLearnt + k;
      const TimestampUs t = At(kLearnt + kLater + k);
      engine->Process({names[0], t, Flow(i, 17.0, 0.9)}, alerts[0]);
      engine->Process({names[1], t, Current(i, 35.8)}, alerts[1]);
      engine->Process({names[2], t, Current(i, 35.8)}, alerts[2]);
    }
    std::vector<std::vector<int>> raises;
    for (const std::vector<Alert>& a : alerts) raises.push_back(AnomalyRaises(a, kLearnt + kLater));
    return raises;
  }
};

TEST(EngineResumeTest, ChannelsOfAnAssetRelearnTogetherAtANewOperatingPoint) {
  const PumpTrain pumps;
  const int samples = kHold + kRelearn + 300;

  // The premise, each channel on its own: the moved current alarms on the old model.
  EngineOptions alone = SmallModel();
  alone.defaults.resume.relearn_with_asset = false;
  auto engine = std::make_unique<Engine>(alone);
  std::vector<std::vector<int>> raises = pumps.Resume(engine, samples);
  EXPECT_EQ(engine->channel_status(*engine->FindChannel(pumps.names[0])).relearns, 1);
  EXPECT_EQ(engine->channel_status(*engine->FindChannel(pumps.names[1])).relearns, 0);
  EXPECT_FALSE(raises[1].empty()) << "the premise: 4 sd off alarms on the old model";

  engine = std::make_unique<Engine>(SmallModel());
  raises = pumps.Resume(engine, samples);
  const ChannelStatus current_a = engine->channel_status(*engine->FindChannel(pumps.names[1]));
  EXPECT_EQ(current_a.relearns, 1) << "re-learnt with the pump's flow";
  EXPECT_EQ(current_a.state, ChannelState::kArmed) << "and armed again after relearn_samples";
  EXPECT_TRUE(raises[0].empty());
  EXPECT_TRUE(raises[1].empty()) << "no alarm from the operating point";
  // Pump B is another asset: its current keeps its own verdict and alarms.
  EXPECT_EQ(engine->channel_status(*engine->FindChannel(pumps.names[2])).relearns, 0);
  EXPECT_FALSE(raises[2].empty());
}

}  // namespace
}  // namespace nightjar::core
