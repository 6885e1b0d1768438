// Holes nightjar makes itself (Engine::NoteDiscontinuity): the time it was not running and
// samples it dropped are not sensor gaps. A channel loaded from a checkpoint that sees its
// next sample hours later raises no gap alarm, stays armed and restarts its sequence
// exactly as after a real gap; one that never comes back still raises its gap, counted from
// the first clock after the load; a hole from dropped samples raises nothing, and the next
// real silence does. The gap rule itself (no sample for longer than gap_periods sample
// periods) is the engine's definition (common practice for telemetry staleness).
#include <gtest/gtest.h>

#include <cmath>
#include <cstring>
#include <numbers>
#include <random>
#include <vector>

#include "core/engine.h"
#include "support/same_alerts.h"

namespace nightjar::core {
namespace {

constexpr TimestampUs kStart = 1'780'000'000LL * kMicrosPerSecond;
constexpr char kName[] = "cw2.pump_a.flow";
constexpr int kLearnt = 900;          // samples before the checkpoint (armed at 600)
constexpr int kLater = 5 * 3600;      // the next sample comes 5 h after the last one
constexpr int kResumed = 200;         // samples fed after the hole
constexpr int kGapLimitSamples = 10;  // default gap_periods x the 1 s period

TimestampUs At(int i) { return kStart + static_cast<TimestampUs>(i) * kMicrosPerSecond; }

EngineOptions SmallModel() {
  EngineOptions options;
  options.defaults.unit = "m3/h";
  options.defaults.warmup_samples = 600;
  options.defaults.sample_period_s = 1.0;
  options.defaults.predictor.hidden_size = 8;
  options.defaults.predictor.window = 8;
  // Without time-of-day inputs the only difference between two continuations at
  // different times is the sequence reset.
  options.defaults.time_of_day_features = false;
  return options;
}

double Flow(int i) {
  std::mt19937_64 rng(static_cast<std::uint64_t>(i) * 7919u + 3u);
  std::normal_distribution<double> noise(0.0, 0.3);
  return 50.0 + 5.0 * std::sin(2.0 * std::numbers::pi * i / 300.0) + noise(rng);
}

using testing::SameBits;

int CountGap(const std::vector<Alert>& alerts, AlertPhase phase) {
  int n = 0;
  for (const Alert& a : alerts) n += a.detector == Detector::kGap && a.phase == phase ? 1 : 0;
  return n;
}

// An engine that has learnt kLearnt samples of the flow, and its checkpoint.
struct Learnt {
  Engine engine{SmallModel()};
  ChannelId id = 0;
  std::vector<std::uint8_t> bytes;
  Learnt() {
    id = *engine.AddChannel(kName);
    std::vector<Alert> alerts;
    for (int i = 0; i < kLearnt; ++i) engine.Process(id, At(i), Flow(i), alerts);
    engine.SaveChannel(id, bytes);
  }
};

// Feeds samples [from, from + kResumed) (values of the flow after the checkpoint) and
// returns the expected value after each.
std::vector<double> Resume(Engine& engine, ChannelId id, int from, std::vector<Alert>& alerts) {
  std::vector<double> expected;
  for (int k = 0; k < kResumed; ++k) {
    engine.Process(id, At(from + k), Flow(kLearnt + k), alerts);
    expected.push_back(engine.channel_status(id).last_expected);
  }
  return expected;
}

TEST(EngineDiscontinuityTest, LoadedChannelResumingHoursLaterRaisesNoGapAndRestartsItsSequence) {
  Learnt learnt;
  ASSERT_EQ(learnt.engine.channel_status(learnt.id).state, ChannelState::kArmed);

  // Reference: the same channel, never stopped, whose sensor was silent for 5 h: a real
  // gap, raised and cleared, and its sequence restarted.
  std::vector<Alert> uninterrupted_alerts;
  const std::vector<double> after_real_gap =
      Resume(learnt.engine, learnt.id, kLearnt + kLater, uninterrupted_alerts);
  ASSERT_EQ(CountGap(uninterrupted_alerts, AlertPhase::kRaise), 1)
      << "the premise: 5 h of silence is a gap for a channel that was watched";

  // Restarted nightjar: loaded from the checkpoint, first sample 5 h later.
  Engine restarted(SmallModel());
  ASSERT_TRUE(restarted.LoadChannel(kName, learnt.bytes).ok());
  const ChannelId id = *restarted.FindChannel(kName);
  std::vector<Alert> alerts;
  restarted.Process(id, At(kLearnt + kLater), Flow(kLearnt), alerts);
  EXPECT_EQ(CountGap(alerts, AlertPhase::kRaise), 0) << alerts.front().message;
  EXPECT_EQ(restarted.channel_status(id).state, ChannelState::kArmed);

  Engine restarted_again(SmallModel());
  ASSERT_TRUE(restarted_again.LoadChannel(kName, learnt.bytes).ok());
  const ChannelId again = *restarted_again.FindChannel(kName);
  const std::vector<double> after_restart =
      Resume(restarted_again, again, kLearnt + kLater, alerts);
  EXPECT_EQ(CountGap(alerts, AlertPhase::kRaise), 0);
  EXPECT_EQ(restarted_again.channel_status(again).state, ChannelState::kArmed);
  // Restarted exactly as after the real gap: the same forecasts, bit for bit.
  ASSERT_EQ(after_restart.size(), after_real_gap.size());
  for (std::size_t k = 0; k < after_restart.size(); ++k) {
    EXPECT_TRUE(SameBits(after_restart[k], after_real_gap[k])) << "sample " << k;
  }

  // And that is a reset: a load whose next sample follows on at once keeps the recurrent
  // state and forecasts differently.
  Engine continued(SmallModel());
  ASSERT_TRUE(continued.LoadChannel(kName, learnt.bytes).ok());
  std::vector<Alert> continued_alerts;
  const std::vector<double> after_continue =
      Resume(continued, *continued.FindChannel(kName), kLearnt, continued_alerts);
  int differ = 0;
  for (std::size_t k = 0; k < after_continue.size(); ++k) {
    differ += SameBits(after_continue[k], after_restart[k]) ? 0 : 1;
  }
  EXPECT_GT(differ, 0);
}

TEST(EngineDiscontinuityTest, LoadedChannelThatNeverComesBackRaisesItsGapFromTheRestart) {
  Learnt learnt;
  Engine restarted(SmallModel());
  ASSERT_TRUE(restarted.LoadChannel(kName, learnt.bytes).ok());
  const ChannelId id = *restarted.FindChannel(kName);
  std::vector<Alert> alerts;
  const int first_clock = kLearnt + kLater;  // e.g. another channel's first sample
  restarted.AdvanceClock(At(first_clock), alerts);
  restarted.AdvanceClock(At(first_clock + kGapLimitSamples), alerts);
  EXPECT_TRUE(alerts.empty()) << "within the gap limit of the restart";
  restarted.AdvanceClock(At(first_clock + kGapLimitSamples + 1), alerts);
  ASSERT_EQ(CountGap(alerts, AlertPhase::kRaise), 1);
  EXPECT_EQ(restarted.channel_status(id).state, ChannelState::kStale);
}

TEST(EngineDiscontinuityTest, DroppedSamplesRaiseNoGapButTheNextSilenceDoes) {
  Learnt with_note;
  Learnt without_note;
  const int resume_at = kLearnt + 120;  // 2 minutes of samples dropped
  std::vector<Alert> alerts;
  with_note.engine.NoteDiscontinuity(with_note.id, Discontinuity::kDropped);
  with_note.engine.AdvanceClock(At(resume_at - 1), alerts);
  with_note.engine.Process(with_note.id, At(resume_at), Flow(kLearnt), alerts);
  EXPECT_EQ(CountGap(alerts, AlertPhase::kRaise), 0);
  EXPECT_EQ(with_note.engine.channel_status(with_note.id).state, ChannelState::kArmed);

  // The note covers one hole only: silence after the resumed sample is the sensor's.
  with_note.engine.AdvanceClock(At(resume_at + kGapLimitSamples + 1), alerts);
  EXPECT_EQ(CountGap(alerts, AlertPhase::kRaise), 1);

  // Without the note the same hole is a gap (the test could fail).
  std::vector<Alert> plain;
  without_note.engine.AdvanceClock(At(resume_at - 1), plain);
  EXPECT_EQ(CountGap(plain, AlertPhase::kRaise), 1);
}

}  // namespace
}  // namespace nightjar::core
