// The level chart at engine level (core/level_monitor.h): a quantised flow that flips
// between neighbouring values in normal running drops by two units (about four of its
// standard deviations) and stays there, as a partly shut valve does. A one-step
// forecaster follows the new level within a few samples (DESIGN-NOTES §3), so the
// residual charts alone miss most of the fault; the level chart raises it and keeps the
// alarm active for as long as it lasts, then clears.
#include <gtest/gtest.h>

#include <cmath>
#include <random>
#include <vector>

#include "core/engine.h"

namespace nightjar::core {
namespace {

constexpr TimestampUs kStart = 1'780'000'000LL * kMicrosPerSecond;
constexpr int kFaultStart = 3000;
constexpr int kFaultEnd = 4500;
constexpr int kEnd = 5200;

EngineOptions FlowOptions(bool level) {
  EngineOptions options;
  options.defaults.unit = "m3/h";
  options.defaults.asset = "none";
  options.defaults.warmup_samples = 1200;
  options.defaults.sample_period_s = 1.0;
  options.defaults.predictor.hidden_size = 8;
  options.defaults.predictor.window = 8;
  options.defaults.time_of_day_features = false;
  options.defaults.level.enabled = level;
  return options;
}

struct FlowRun {
  int fault_seconds_in_alarm = 0;  // samples of the fault with the anomaly alarm active
  int raises_before_fault = 0;
  bool active_at_end = false;
  Detector first_fault_detector = Detector::kTemplate;
  int first_fault_raise = -1;
};

FlowRun Replay(bool level) {
  Engine engine(FlowOptions(level));
  const ChannelId id = *engine.AddChannel("cw2.return_line.flow");
  std::mt19937_64 rng(11);
  std::normal_distribution<double> noise(0.0, 0.5);
  std::vector<Alert> alerts;
  FlowRun run;
  for (int i = 0; i < kEnd; ++i) {
    const double shift = i >= kFaultStart && i < kFaultEnd ? -2.0 : 0.0;
    const double value = std::round(32.0 + shift + noise(rng));  // the meter reads whole units
    alerts.clear();
    engine.Process(id, kStart + static_cast<TimestampUs>(i) * kMicrosPerSecond, value, alerts);
    for (const Alert& a : alerts) {
      if (a.kind != AlertKind::kAnomaly || a.phase != AlertPhase::kRaise) continue;
      if (i < kFaultStart) ++run.raises_before_fault;
      if (i >= kFaultStart && run.first_fault_raise < 0) {
        run.first_fault_raise = i - kFaultStart;
        run.first_fault_detector = a.detector;
      }
    }
    const bool active = engine.channel(id).alarm(AlarmCondition::kAnomaly).active();
    if (i >= kFaultStart && i < kFaultEnd && active) ++run.fault_seconds_in_alarm;
    run.active_at_end = active;
  }
  return run;
}

TEST(EngineLevelTest, ALastingShiftOfAQuantisedFlowIsRaisedAndHeldForItsWholeLength) {
  const int fault = kFaultEnd - kFaultStart;
  // The premise: the residual charts alone hold the alarm for under half of the fault (its
  // first minutes, while the forecaster runs closed loop; then it re-syncs and follows).
  const FlowRun residual_only = Replay(false);
  EXPECT_LT(residual_only.fault_seconds_in_alarm, fault / 2);

  const FlowRun run = Replay(true);
  EXPECT_EQ(run.raises_before_fault, residual_only.raises_before_fault)
      << "the normal flips of the meter add no false raise";
  ASSERT_GE(run.first_fault_raise, 0);
  EXPECT_EQ(run.first_fault_detector, Detector::kLevel);
  EXPECT_LE(run.first_fault_raise, 40) << "within the 15 s on-delay and a few samples";
  EXPECT_GE(run.fault_seconds_in_alarm, fault - 40) << "held until the fault ends";
  EXPECT_FALSE(run.active_at_end) << "and cleared once the flow is back";
}

}  // namespace
}  // namespace nightjar::core
