// End-to-end checks of the detection engine on synthetic channels: each fault type is
// detected within a stated number of samples, clean data stays quiet, runs repeat
// exactly, and the per-sample path does not allocate.
#include "core/engine.h"

#include <gtest/gtest.h>

#include <cmath>
#include <cstring>
#include <limits>
#include <numbers>
#include <random>
#include <string>
#include <vector>

#include "support/allocation_counter.h"

namespace nightjar::core {
namespace {

constexpr TimestampUs kStart = 1'780'000'000LL * kMicrosPerSecond;  // 2026-05-28
constexpr double kNoise = 0.3;

// A cooling-water flow: 50 m3/h with a 5-minute oscillation and sensor noise.
class FlowSignal {
 public:
  explicit FlowSignal(std::uint64_t seed, double period = 300.0, double noise = kNoise)
      : rng_(seed), noise_(0.0, noise), period_(period) {}
  double At(int i) {
    return 50.0 + 5.0 * std::sin(2.0 * std::numbers::pi * i / period_) + noise_(rng_);
  }

 private:
  std::mt19937_64 rng_;
  std::normal_distribution<double> noise_;
  double period_;
};

EngineOptions SmallModel() {
  EngineOptions options;
  options.defaults.unit = "m3/h";
  options.defaults.warmup_samples = 3000;
  options.defaults.predictor.hidden_size = 16;
  options.defaults.predictor.window = 16;
  options.defaults.sensor.flatline_samples = 60;
  options.defaults.sensor.min_value = 0.0;
  options.defaults.sensor.max_value = 200.0;
  return options;
}

TimestampUs At(int i) { return kStart + static_cast<TimestampUs>(i) * kMicrosPerSecond; }

struct FeedResult {
  std::vector<Alert> alerts;
  std::vector<double> expected;  // the engine's expected value before each sample
};

// Feeds `samples` of the flow signal, with `fault(i, x)` applied, through one channel.
template <typename Fault>
FeedResult Feed(Engine& engine, int samples, Fault fault, std::uint64_t seed = 11) {
  FlowSignal signal(seed);
  FeedResult run;
  const ChannelId id = *engine.AddChannel("skid1.flow");
  for (int i = 0; i < samples; ++i) {
    const double x = fault(i, signal.At(i));
    if (std::isnan(x) && std::signbit(x)) continue;  // -NaN marks "no sample" (a gap)
    engine.Process(id, At(i), x, run.alerts);
    run.expected.push_back(engine.channel_status(id).last_expected);
  }
  return run;
}

std::string Describe(const std::vector<Alert>& alerts) {
  std::string text;
  for (const Alert& a : alerts) {
    text += std::to_string((a.time - kStart) / kMicrosPerSecond) + " " + DetectorName(a.detector) +
            " " + AlertPhaseName(a.phase) + ": " + a.message + "\n";
  }
  return text;
}

std::vector<Alert> Raises(const std::vector<Alert>& alerts, AlertKind kind) {
  std::vector<Alert> out;
  for (const Alert& a : alerts) {
    if (a.kind == kind && a.phase == AlertPhase::kRaise) out.push_back(a);
  }
  return out;
}

constexpr int kFaultAt = 6000;

TEST(EngineTest, QuietOnCleanData) {
  Engine engine(SmallModel());
  FeedResult run = Feed(engine, 12000, [](int, double x) { return x; });
  // Budget 0.5 false alerts/day; 9000 armed samples are 0.1 day: expect ~0.05, allow 1.
  EXPECT_LE(Raises(run.alerts, AlertKind::kAnomaly).size(), 1u);
  EXPECT_TRUE(Raises(run.alerts, AlertKind::kSensor).empty());
  EXPECT_EQ(engine.channel_status(0).state, ChannelState::kArmed);
}

std::vector<Alert> RaisesFrom(const std::vector<Alert>& alerts, TimestampUs from) {
  std::vector<Alert> out;
  for (const Alert& a : alerts) {
    if (a.kind == AlertKind::kAnomaly && a.phase == AlertPhase::kRaise && a.time >= from) {
      out.push_back(a);
    }
  }
  return out;
}

TEST(EngineTest, DetectsStepWithinTenSamplesOfTheOnDelay) {
  Engine engine(SmallModel());  // the default 15 s anomaly on-delay
  // +2 m3/h (6.7 noise sigmas) from kFaultAt for 300 s, then back.
  FeedResult run = Feed(engine, kFaultAt + 900, [](int i, double x) {
    return (i >= kFaultAt && i < kFaultAt + 300) ? x + 2.0 : x;
  });
  SCOPED_TRACE(Describe(run.alerts));
  std::vector<Alert> raises = RaisesFrom(run.alerts, At(kFaultAt));
  ASSERT_FALSE(raises.empty());
  // TR18.2.5/EEMUA (references.md §7.2, from memory): the condition must hold 15 s first.
  EXPECT_GE(raises[0].time, At(kFaultAt + 15));
  EXPECT_LE(raises[0].time, At(kFaultAt + 15 + 10));
  EXPECT_GT(raises[0].z, 0.0);
  EXPECT_NE(raises[0].message.find("above the expected"), std::string::npos);
  EXPECT_EQ(engine.channel_status(0).state, ChannelState::kArmed) << "cleared after the fault";
}

TEST(EngineTest, DetectsSpikeAtOnceWithoutOnDelay) {
  EngineOptions options = SmallModel();
  options.defaults.anomaly_alarm.on_delay_s = 0.0;  // the spike chart's own reaction
  Engine engine(options);
  FeedResult run = Feed(engine, kFaultAt + 300,
                        [](int i, double x) { return i == kFaultAt ? x + 10 * kNoise * 2 : x; });
  std::vector<Alert> raises = RaisesFrom(run.alerts, At(kFaultAt));
  ASSERT_EQ(raises.size(), 1u) << Describe(run.alerts);
  EXPECT_EQ(raises[0].time, At(kFaultAt));
  EXPECT_EQ(raises[0].detector, Detector::kSpike);
}

TEST(EngineTest, DetectsFlatlineWithinItsWindow) {
  Engine engine(SmallModel());
  double held = 0.0;
  FeedResult run = Feed(engine, kFaultAt + 300, [&held](int i, double x) {
    if (i == kFaultAt) held = x;
    return i >= kFaultAt ? held : x;
  });
  std::vector<Alert> raises = Raises(run.alerts, AlertKind::kSensor);
  ASSERT_EQ(raises.size(), 1u);
  EXPECT_EQ(raises[0].detector, Detector::kFlatline);
  EXPECT_LE(raises[0].time, At(kFaultAt + 60));
}

TEST(EngineTest, DetectsGapWhenClockMovesOn) {
  Engine engine(SmallModel());
  std::vector<Alert> alerts;
  FlowSignal signal(3);
  const ChannelId id = *engine.AddChannel("skid1.flow");
  for (int i = 0; i < 200; ++i) engine.Process(id, At(i), signal.At(i), alerts);
  engine.AdvanceClock(At(205), alerts);
  EXPECT_TRUE(alerts.empty()) << "6 s of silence is within 10 periods";
  engine.AdvanceClock(At(211), alerts);
  ASSERT_EQ(alerts.size(), 1u);
  EXPECT_EQ(alerts[0].detector, Detector::kGap);
  EXPECT_EQ(alerts[0].phase, AlertPhase::kRaise);
  EXPECT_EQ(engine.channel_status(id).state, ChannelState::kStale);
  // Samples resume: the gap alarm clears after the sensor off-delay (10 s).
  for (int i = 300; i < 320; ++i) engine.Process(id, At(i), signal.At(i), alerts);
  ASSERT_EQ(alerts.size(), 2u);
  EXPECT_EQ(alerts[1].detector, Detector::kGap);
  EXPECT_EQ(alerts[1].phase, AlertPhase::kClear);
}

TEST(EngineTest, BadValuesRaiseSensorAlarmsAndAreNotLearnt) {
  Engine engine(SmallModel());
  FeedResult run = Feed(engine, 400, [](int i, double x) {
    if (i == 100) return std::numeric_limits<double>::quiet_NaN();
    if (i == 200) return 1e6;  // outside [0, 200]
    return x;
  });
  std::vector<Alert> raises = Raises(run.alerts, AlertKind::kSensor);
  ASSERT_EQ(raises.size(), 2u);
  EXPECT_EQ(raises[0].detector, Detector::kNotFinite);
  EXPECT_EQ(raises[1].detector, Detector::kRange);
  EXPECT_EQ(engine.channel_status(0).rejected, 2);
}

TEST(EngineTest, OutOfOrderSamplesAreCountedAndDropped) {
  Engine engine(SmallModel());
  std::vector<Alert> alerts;
  const ChannelId id = *engine.AddChannel("skid1.flow");
  engine.Process(id, At(10), 50.0, alerts);
  engine.Process(id, At(10), 51.0, alerts);  // duplicate timestamp
  engine.Process(id, At(9), 52.0, alerts);   // backwards
  EXPECT_EQ(engine.channel_status(id).out_of_order, 2);
  EXPECT_DOUBLE_EQ(engine.channel_status(id).last_value, 50.0);
}

TEST(EngineTest, SameInputSameAlerts) {
  auto once = [] {
    Engine engine(SmallModel());
    return Feed(engine, kFaultAt + 900, [](int i, double x) {
      return (i >= kFaultAt && i < kFaultAt + 300) ? x + 2.0 : x;
    });
  };
  FeedResult a = once();
  FeedResult b = once();
  ASSERT_EQ(a.alerts.size(), b.alerts.size());
  ASSERT_FALSE(a.alerts.empty());
  for (std::size_t i = 0; i < a.alerts.size(); ++i) {
    EXPECT_EQ(a.alerts[i].time, b.alerts[i].time);
    EXPECT_EQ(a.alerts[i].message, b.alerts[i].message);
    // Bit-for-bit: compare the doubles exactly.
    EXPECT_EQ(std::memcmp(&a.alerts[i].expected, &b.alerts[i].expected, sizeof(double)), 0);
    EXPECT_EQ(std::memcmp(&a.alerts[i].statistic, &b.alerts[i].statistic, sizeof(double)), 0);
  }
  EXPECT_EQ(a.expected, b.expected);
}

TEST(EngineTest, PerSampleStepDoesNotAllocate) {
  Engine engine(SmallModel());
  FlowSignal signal(5);
  std::vector<Alert> alerts;
  alerts.reserve(64);
  const ChannelId id = *engine.AddChannel("skid1.flow");
  for (int i = 0; i < 4000; ++i) engine.Process(id, At(i), signal.At(i), alerts);
  ASSERT_EQ(engine.channel_status(id).state, ChannelState::kArmed);
  const std::size_t alerts_before = alerts.size();
  std::vector<double> values(2000);
  for (int i = 0; i < 2000; ++i) values[static_cast<std::size_t>(i)] = signal.At(4000 + i);
  {
    testing::AllocationCounter counter;
    Eigen::internal::set_is_malloc_allowed(false);
    for (int i = 0; i < 2000; ++i) {
      engine.Process(id, At(4000 + i), values[static_cast<std::size_t>(i)], alerts);
    }
    Eigen::internal::set_is_malloc_allowed(true);
    EXPECT_EQ(counter.count(), 0u);
  }
  EXPECT_EQ(alerts.size(), alerts_before) << "an alert may allocate; this run must have none";
}

TEST(EngineTest, RejectsInvalidOptionsNamingTheKey) {
  EngineOptions options;
  options.defaults.predictor.hidden_size = 0;
  Engine engine(options);
  Result<ChannelId> id = engine.AddChannel("skid1.flow");
  ASSERT_FALSE(id.ok());
  EXPECT_NE(id.status().message().find("predictor.hidden_size"), std::string::npos);
  std::vector<Alert> alerts;
  engine.Process(Sample{"skid1.flow", At(0), 1.0}, alerts);
  EXPECT_EQ(engine.rejected_samples(), 1);
  EXPECT_EQ(engine.channel_count(), 0u);
}

TEST(EngineTest, AcknowledgeAndShelveThroughTheEngine) {
  Engine engine(SmallModel());
  FeedResult run =
      Feed(engine, kFaultAt + 100, [](int i, double x) { return i >= kFaultAt ? x + 3.0 : x; });
  ASSERT_EQ(engine.channel_status(0).state, ChannelState::kInAlarm);
  const TimestampUs now = At(kFaultAt + 100);
  EXPECT_TRUE(engine.Acknowledge("skid1.flow", AlarmCondition::kAnomaly, now).ok());
  EXPECT_EQ(engine.channel(0).alarm(AlarmCondition::kAnomaly).state(), AlarmState::kAcknowledged);
  EXPECT_FALSE(engine.Acknowledge("skid1.flow", AlarmCondition::kAnomaly, now).ok());
  EXPECT_EQ(engine.Acknowledge("no.such", AlarmCondition::kAnomaly, now).code(),
            StatusCode::kNotFound);
  EXPECT_TRUE(
      engine.Shelve("skid1.flow", AlarmCondition::kAnomaly, now, now + 60 * kMicrosPerSecond).ok());
  EXPECT_EQ(engine.channel(0).alarm(AlarmCondition::kAnomaly).state(), AlarmState::kShelved);
  std::vector<Alert> alerts;
  EXPECT_TRUE(engine.Unshelve("skid1.flow", AlarmCondition::kAnomaly, now, alerts).ok());
  ASSERT_EQ(alerts.size(), 1u) << "still active when unshelved: annunciated again";
  EXPECT_EQ(alerts[0].phase, AlertPhase::kRaise);
}

TEST(EngineTest, LastValueBaselineForecastsTheLastSample) {
  // "next = last" (common practice baseline): the expected value is the previous sample.
  EngineOptions options = SmallModel();
  options.defaults.forecaster = Forecaster::kLastValue;
  Engine engine(options);
  FlowSignal signal(9);
  std::vector<Alert> alerts;
  const ChannelId id = *engine.AddChannel("skid1.flow");
  double previous = 0.0;
  for (int i = 0; i < 400; ++i) {
    const double x = signal.At(i);
    engine.Process(id, At(i), x, alerts);
    if (i > 200) {
      EXPECT_DOUBLE_EQ(engine.channel_status(id).last_expected, previous);
    }
    previous = x;
  }
}

TEST(EngineTest, ForecastBeatsNaiveLastValue) {
  // The common-sense baseline every forecaster must beat: next = last (common practice).
  // A pump-load oscillation of period 50 s with 0.1 m3/h noise; errors after warm-up.
  Engine engine(SmallModel());
  FlowSignal signal(21, 50.0, 0.1);
  std::vector<Alert> alerts;
  const ChannelId id = *engine.AddChannel("skid1.flow");
  double model_error = 0.0;
  double naive_error = 0.0;
  double previous = 0.0;
  for (int i = 0; i < 12000; ++i) {
    const double x = signal.At(i);
    engine.Process(id, At(i), x, alerts);
    if (i >= 6000) {
      model_error += std::abs(x - engine.channel_status(id).last_expected);
      naive_error += std::abs(x - previous);
    }
    previous = x;
  }
  EXPECT_LT(model_error, 0.5 * naive_error)
      << "model MAE " << model_error / 6000 << " naive MAE " << naive_error / 6000;
}

TEST(EngineTest, DetectsSlowDriftOnASteadyChannel) {
  // A bearing temperature at steady load: 60 degC with 0.1 degC sensor noise. From
  // kFaultAt it drifts by 0.002 degC per sample (7.2 degC/h, one noise sigma every 50 s).
  Engine engine(SmallModel());
  std::mt19937_64 rng(31);
  std::normal_distribution<double> noise(0.0, 0.1);
  std::vector<Alert> alerts;
  const ChannelId id = *engine.AddChannel("cw2.pump_a.bearing_temp");
  for (int i = 0; i < kFaultAt + 1800; ++i) {
    const double drift = i >= kFaultAt ? 0.002 * (i - kFaultAt) : 0.0;
    engine.Process(id, At(i), 60.0 + noise(rng) + drift, alerts);
  }
  SCOPED_TRACE(Describe(alerts));
  EXPECT_TRUE(RaisesFrom(alerts, At(0)).size() == RaisesFrom(alerts, At(kFaultAt)).size())
      << "no raise before the drift starts";
  std::vector<Alert> raises = RaisesFrom(alerts, At(kFaultAt));
  ASSERT_FALSE(raises.empty());
  EXPECT_LE(raises[0].time, At(kFaultAt + 300));
}

TEST(EngineTest, HoldsTheAlarmForTheWholeSustainedFault) {
  // DESIGN-NOTES §3: a one-step forecaster fed the faulty values would follow a step and
  // clear the alarm while the fault is still there. A discharge pressure at 4.2 bar with
  // 0.02 bar noise steps down by 0.1 bar (5 sigmas) for 240 s, then recovers.
  Engine engine(SmallModel());
  std::mt19937_64 rng(41);
  std::normal_distribution<double> noise(0.0, 0.02);
  std::vector<Alert> alerts;
  const ChannelId id = *engine.AddChannel("cw2.pump_a.discharge_pressure");
  for (int i = 0; i < kFaultAt + 600; ++i) {
    const bool fault = i >= kFaultAt && i < kFaultAt + 240;
    engine.Process(id, At(i), 4.2 + noise(rng) - (fault ? 0.1 : 0.0), alerts);
  }
  SCOPED_TRACE(Describe(alerts));
  std::vector<Alert> episode;
  for (const Alert& a : alerts) {
    if (a.kind == AlertKind::kAnomaly) episode.push_back(a);
  }
  ASSERT_EQ(episode.size(), 2u) << "one raise, one clear";
  EXPECT_EQ(episode[0].phase, AlertPhase::kRaise);
  EXPECT_LE(episode[0].time, At(kFaultAt + 15 + 10));  // after the 15 s on-delay
  EXPECT_LT(episode[0].z, 0.0);
  EXPECT_EQ(episode[1].phase, AlertPhase::kClear);
  EXPECT_GE(episode[1].time, At(kFaultAt + 240)) << "held while the fault lasts";
  EXPECT_LE(episode[1].time, At(kFaultAt + 240 + 120));
}

TEST(EngineTest, MillionCleanSamplesKeepTheFalseAlarmBudget) {
  // The whole engine, LSTM included, on 1e6 samples of in-control noise (11.6 days at
  // 1 Hz). A generous budget of 20 false alerts/day gives ~230 expected if the three
  // charts' false alerts never coincided; the achieved rate must lie within 0.1..1.15 of
  // it (measured 0.28 on this build: the budget is an upper bound and the design is
  // conservative; the wide lower bound allows for other compilers' float rounding) (the charts'
  // designs come from the Markov-chain ARLs checked against references.md §1-§2; the residuals here
  // come from an online-trained model, so the measured variance-inflation correction is what keeps
  // the budget).
  EngineOptions options;
  options.defaults.warmup_samples = 3000;
  options.defaults.predictor.hidden_size = 8;
  options.defaults.predictor.window = 8;
  options.defaults.predictor.train_every = 4;
  options.defaults.thresholds.false_alarms_per_day = 20.0;
  // The budget is the charts' design; the default on-delay would drop most of their short
  // excursions on top (2 raises instead of ~65 on this build), hiding whether they meet it.
  options.defaults.anomaly_alarm.on_delay_s = 0.0;
  Engine engine(options);
  std::mt19937_64 rng(51);
  std::normal_distribution<double> noise(0.0, 0.5);
  std::vector<Alert> alerts;
  const ChannelId id = *engine.AddChannel("cw2.pump_a.motor_current");
  constexpr int kSamples = 1'000'000;
  for (int i = 0; i < kSamples; ++i) engine.Process(id, At(i), 35.0 + noise(rng), alerts);
  const double armed_days = (kSamples - 3000) / kSecondsPerDay;
  const double budget = 20.0 * armed_days;
  const auto raises = static_cast<double>(Raises(alerts, AlertKind::kAnomaly).size());
  EXPECT_GE(raises, 0.1 * budget) << raises << " raises, budget " << budget;
  EXPECT_LE(raises, 1.15 * budget) << raises << " raises, budget " << budget;
  RecordProperty("false_alarm_ratio", std::to_string(raises / budget));
  EXPECT_TRUE(Raises(alerts, AlertKind::kSensor).empty());
}

TEST(EngineTest, ReportsAnExpectedEventFromItsTemplate) {
  // A CW2 pump start (direct-on-line inrush decaying to the running current) configured
  // as an expected event on the motor current: one event alert (raise and clear) when it
  // happens, none in the hour of steady running before it.
  std::vector<double> start;
  for (int i = 0; i < 60; ++i)
    start.push_back(i < 5 ? 0.0 : 35.0 + 175.0 * std::exp(-(i - 5) / 3.0));
  EngineOptions options = SmallModel();
  options.defaults.sensor.flatline_samples = 0;
  options.defaults.events.push_back(EventTemplate{.name = "pump_start", .shape = start});
  Engine engine(options);
  std::mt19937_64 rng(61);
  std::normal_distribution<double> noise(0.0, 0.5);
  std::vector<Alert> alerts;
  const ChannelId id = *engine.AddChannel("cw2.pump_a.motor_current");
  int i = 0;
  for (; i < 3600; ++i) engine.Process(id, At(i), 35.0 + noise(rng), alerts);
  for (int k = 0; k < 300; ++k, ++i) engine.Process(id, At(i), noise(rng) * 0.05, alerts);
  for (const double v : start) engine.Process(id, At(i++), v + noise(rng), alerts);
  for (int k = 0; k < 300; ++k, ++i) engine.Process(id, At(i), 35.0 + noise(rng), alerts);
  std::vector<Alert> events;
  for (const Alert& a : alerts) {
    if (a.kind == AlertKind::kEvent) events.push_back(a);
  }
  ASSERT_EQ(events.size(), 2u) << Describe(alerts);
  EXPECT_EQ(events[0].phase, AlertPhase::kRaise);
  EXPECT_EQ(events[1].phase, AlertPhase::kClear);
  EXPECT_EQ(events[0].detector, Detector::kTemplate);
  EXPECT_GE(events[0].time, At(3900 + 40));
  EXPECT_LE(events[0].time, At(3900 + 70));
  EXPECT_NE(events[0].message.find("pump_start"), std::string::npos);
  EXPECT_LE(events[0].statistic, events[0].threshold);
}

TEST(EngineTest, ChannelFitsIn66KiBAtDefaults) {
  // Budget from the engine's design brief: a whole channel (model, optimiser state,
  // rings, charts, alarms) within 64 KiB at H = 32, W = 32, so 10 000 channels fit in
  // well under 1 GiB on an edge box; plus 2 KiB since the level chart came (its charts
  // are a second ResidualMonitor, about 0.5 KiB; 10 000 channels are still 0.63 GiB).
  Engine engine(EngineOptions{});
  const ChannelId id = *engine.AddChannel("cw2.pump_a.flow");
  RecordProperty("channel_bytes", std::to_string(engine.channel(id).MemoryBytes()));
  EXPECT_LE(engine.channel(id).MemoryBytes(), 66u * 1024u);
}

TEST(EngineTest, AQuietSpellDoesNotPinAnAlarmForEver) {
  // With the flatline check off, a sensor that sits still for 20 min teaches the residual
  // scale that nothing moves; when it moves again an alarm is right, but it must end once
  // the closed-loop hold (300 samples) runs out and the scale re-learns.
  EngineOptions options = SmallModel();
  options.defaults.sensor.flatline_samples = 0;
  Engine engine(options);
  FlowSignal signal(71);
  std::vector<Alert> alerts;
  const ChannelId id = *engine.AddChannel("cw2.pump_a.flow");
  double held = 0.0;
  for (int i = 0; i < kFaultAt + 3000; ++i) {
    double x = signal.At(i);
    if (i == kFaultAt) held = x;
    if (i >= kFaultAt && i < kFaultAt + 1200) x = held;
    engine.Process(id, At(i), x, alerts);
  }
  SCOPED_TRACE(Describe(alerts));
  EXPECT_EQ(engine.channel_status(id).state, ChannelState::kArmed)
      << "alarm still up 30 min after the sensor moves again";
}

// Arms "unit.a".."unit.d" (one asset) and "solo" (no dot: grouped with no other) on 1 Hz
// white noise; returns each channel's design ARL0, in that order.
std::vector<double> DesignArlsOfAnAssetAndASoloChannel(bool shares_budget) {
  EngineOptions options;
  options.defaults.warmup_samples = 400;
  options.defaults.predictor.hidden_size = 8;
  options.defaults.predictor.window = 8;
  options.defaults.asset_shares_budget = shares_budget;
  Engine engine(options);
  std::vector<ChannelId> ids;
  for (const char* name : {"unit.a", "unit.b", "unit.c", "unit.d", "solo"}) {
    ids.push_back(*engine.AddChannel(name));
  }
  EXPECT_EQ(engine.asset_channels(ids[0]), 4u);
  EXPECT_EQ(engine.asset_channels(ids[4]), 1u);
  std::mt19937_64 rng(17);
  std::normal_distribution<double> noise(0.0, 1.0);
  std::vector<Alert> alerts;
  for (int i = 0; i < 600; ++i) {
    for (const ChannelId id : ids) engine.Process(id, At(i), 20.0 + noise(rng), alerts);
  }
  std::vector<double> arls;
  for (const ChannelId id : ids) {
    EXPECT_NE(engine.channel_status(id).state, ChannelState::kLearning) << engine.channel_name(id);
    arls.push_back(engine.channel_status(id).design_arl0);
  }
  return arls;
}

TEST(EngineTest, AnAssetsChannelsShareItsFalseAlarmBudget) {
  // ThresholdDesigner's rule (threshold_design.h): each of the three residual charts gets
  // ARL0 = 3 * samples per day / budget. At 1 Hz and the default 0.5 a day that is
  // 518 400 samples for a channel alone; the four channels of an asset share the budget,
  // 0.125 a day each, so each of their charts is designed for four times the run length.
  const std::vector<double> shared = DesignArlsOfAnAssetAndASoloChannel(true);
  EXPECT_NEAR(shared[4], 3.0 * 86400.0 / 0.5, 1.0);
  for (int i = 0; i < 4; ++i) EXPECT_NEAR(shared[i], 3.0 * 86400.0 / 0.125, 4.0) << i;
  // asset_shares_budget: false gives every channel the whole budget.
  const std::vector<double> own = DesignArlsOfAnAssetAndASoloChannel(false);
  for (const double arl : own) EXPECT_NEAR(arl, 3.0 * 86400.0 / 0.5, 1.0);
}

TEST(EngineTest, BudgetShareDividesByTheAssetsChannelsOnlyWhenShared) {
  ChannelOptions options;
  EXPECT_DOUBLE_EQ(BudgetShare(options, 0), 1.0);
  EXPECT_DOUBLE_EQ(BudgetShare(options, 1), 1.0);
  EXPECT_DOUBLE_EQ(BudgetShare(options, 52), 1.0 / 52.0);
  options.thresholds.false_alarms_per_day = 2.0;
  EXPECT_DOUBLE_EQ(SharedThresholdOptions(options, 8).false_alarms_per_day, 0.25);
  options.asset_shares_budget = false;
  EXPECT_DOUBLE_EQ(BudgetShare(options, 52), 1.0);
  EXPECT_DOUBLE_EQ(SharedThresholdOptions(options, 8).false_alarms_per_day, 2.0);
}

TEST(EngineTest, TheRaiseThatMakesAnAlarmChatteringSaysItsClearIsHeld) {
  // A transmitter that drops out of range for one sample every 5 minutes: ISA-18.2 calls
  // an alarm that raises and clears this often chattering (3 raises within the hour by
  // default). The first two raises read as usual; the third says the alarm stands until
  // an hour passes without one, which is when it clears.
  EngineOptions options = SmallModel();
  Engine engine(options);
  std::vector<Alert> alerts;
  const ChannelId id = *engine.AddChannel("cw2.pump_a.flow");
  for (int i = 0; i < 1200 + 3700; ++i) {
    const bool dropout = i < 1200 && i % 300 == 100;
    engine.Process(id, At(i), dropout ? -5.0 : 50.0 + 0.1 * std::sin(i * 0.1), alerts);
  }
  std::vector<Alert> raises;
  std::vector<Alert> clears;
  for (const Alert& a : alerts) {
    if (a.kind != AlertKind::kSensor || a.detector != Detector::kRange) continue;
    (a.phase == AlertPhase::kRaise ? raises : clears).push_back(a);
  }
  SCOPED_TRACE(Describe(alerts));
  ASSERT_EQ(raises.size(), 3u) << "the 4th drop-out falls while the chattering alarm stands";
  EXPECT_EQ(raises[0].message.find("chattering"), std::string::npos);
  EXPECT_EQ(raises[1].message.find("chattering"), std::string::npos);
  EXPECT_NE(raises[2].message.find(
                "chattering (3 raises within 60.0 min): it stands until quiet for 60.0 min"),
            std::string::npos)
      << raises[2].message;
  ASSERT_EQ(clears.size(), 3u);
  // The last drop-out is at 1000 s: the held clear comes an hour after it returned.
  EXPECT_EQ(clears[2].time, At(1001 + 3600));
}

}  // namespace
}  // namespace nightjar::core
