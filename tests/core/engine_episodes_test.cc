// The engine groups the anomaly alarms of an asset's channels into one episode
// (core/alarm_episodes.h): one step fault on a pump, seen on its flow and its pressure,
// reaches the annunciator once. Reference: ISA-18.2 designed suppression with first-out
// grouping (ANSI/ISA-18.2-2016, recalled from memory); the alarm rate per fault is
// common practice for judging nuisance alarms.
#include <gtest/gtest.h>

#include <cmath>
#include <numbers>
#include <random>
#include <set>
#include <string>
#include <vector>

#include "core/engine.h"

namespace nightjar::core {
namespace {

constexpr TimestampUs kStart = 1'780'000'000LL * kMicrosPerSecond;
constexpr int kFaultStart = 4000;
constexpr int kFaultEnd = 4600;
// Long enough after the fault for every alarm to clear: the level chart holds an alarm for
// the whole fault, and a forecaster that re-synced to the fault level sees its end as a
// new step, which it follows in closed loop for up to 300 samples.
constexpr int kAfterFault = 900;

EngineOptions PumpOptions(const std::string& asset) {
  EngineOptions options;
  options.defaults.asset = asset;
  options.defaults.warmup_samples = 3000;
  options.defaults.predictor.hidden_size = 16;
  options.defaults.predictor.window = 16;
  return options;
}

struct PumpRun {
  std::vector<Alert> alerts;
};

// Two channels of pump "skid1.pump": a flow and a discharge pressure on their own daily
// wobble, both stepping up while the fault lasts.
PumpRun FeedPump(Engine& engine) {
  std::mt19937_64 rng(7);
  std::normal_distribution<double> noise(0.0, 0.3);
  PumpRun run;
  const ChannelId flow = *engine.AddChannel("skid1.pump.flow");
  const ChannelId pressure = *engine.AddChannel("skid1.pump.pressure");
  for (int i = 0; i < kFaultEnd + kAfterFault; ++i) {
    const TimestampUs t = kStart + static_cast<TimestampUs>(i) * kMicrosPerSecond;
    const bool fault = i >= kFaultStart && i < kFaultEnd;
    const double wave = std::sin(2.0 * std::numbers::pi * i / 300.0);
    engine.Process(flow, t, 50.0 + 5.0 * wave + noise(rng) + (fault ? 12.0 : 0.0), run.alerts);
    engine.Process(pressure, t, 4.0 + 0.4 * wave + 0.1 * noise(rng) + (fault ? 1.5 : 0.0),
                   run.alerts);
  }
  return run;
}

struct Counts {
  std::set<std::string> raised;  // channels with an anomaly raise during the fault
  int raises = 0;
  int annunciated = 0;
};

Counts CountFaultRaises(const PumpRun& run) {
  Counts counts;
  for (const Alert& alert : run.alerts) {
    const auto second = static_cast<int>((alert.time - kStart) / kMicrosPerSecond);
    if (alert.kind != AlertKind::kAnomaly || alert.phase != AlertPhase::kRaise) continue;
    if (second < kFaultStart || second >= kFaultEnd) continue;
    counts.raised.insert(alert.channel);
    ++counts.raises;
    counts.annunciated += alert.annunciated ? 1 : 0;
  }
  return counts;
}

TEST(EngineEpisodesTest, OneFaultOnTwoChannelsOfAnAssetIsAnnunciatedOnce) {
  Engine engine(PumpOptions(""));  // the default: the asset is the name before its last dot
  const PumpRun run = FeedPump(engine);
  const Counts counts = CountFaultRaises(run);
  ASSERT_EQ(counts.raised.size(), 2u) << "both channels must see the step";
  EXPECT_EQ(counts.annunciated, 1);
  EXPECT_EQ(engine.channel_asset(0), "skid1.pump");
  std::string first_out;
  for (const Alert& alert : run.alerts) {
    if (alert.kind != AlertKind::kAnomaly) {
      EXPECT_TRUE(alert.annunciated);
      EXPECT_TRUE(alert.asset.empty());
      continue;
    }
    EXPECT_EQ(alert.asset, "skid1.pump");
    if (alert.phase == AlertPhase::kRaise && alert.annunciated && first_out.empty()) {
      first_out = alert.channel;
    }
  }
  // Every edge of the fault's episode names the channel that opened it.
  for (const Alert& alert : run.alerts) {
    const auto second = static_cast<int>((alert.time - kStart) / kMicrosPerSecond);
    if (alert.kind == AlertKind::kAnomaly && alert.phase == AlertPhase::kRaise &&
        second >= kFaultStart && second < kFaultEnd) {
      EXPECT_EQ(alert.episode_first_out, first_out) << alert.channel;
    }
  }
  // The episode's last clear is annunciated and leaves nobody in it.
  int ending_clears = 0;
  for (const Alert& alert : run.alerts) {
    if (alert.kind == AlertKind::kAnomaly && alert.phase == AlertPhase::kClear &&
        alert.annunciated) {
      ++ending_clears;
      EXPECT_EQ(alert.episode_active, 0);
    }
  }
  EXPECT_GE(ending_clears, 1);
}

TEST(EngineEpisodesTest, WithGroupingOffEveryChannelsRaiseIsAnnunciated) {
  Engine engine(PumpOptions("none"));
  const Counts counts = CountFaultRaises(FeedPump(engine));
  ASSERT_EQ(counts.raised.size(), 2u);
  EXPECT_EQ(counts.annunciated, counts.raises);
  EXPECT_TRUE(engine.channel_asset(0).empty());
}

// A shelved alarm's clear is never published, so the engine takes a shelved member out of
// its episode at once: otherwise the episode would never end and every later fault on
// the asset would stay silent.
TEST(EngineEpisodesTest, ShelvingTheOnlyMemberEndsTheEpisodeSoTheNextFaultIsAnnunciated) {
  Engine engine(PumpOptions(""));
  std::mt19937_64 rng(7);
  std::normal_distribution<double> noise(0.0, 0.3);
  const ChannelId flow = *engine.AddChannel("skid1.pump.flow");
  const ChannelId pressure = *engine.AddChannel("skid1.pump.pressure");
  std::vector<Alert> out;
  int flow_raised_at = -1;
  bool pressure_annunciated = false;
  for (int i = 0; i < kFaultEnd + 2000 && !pressure_annunciated; ++i) {
    const TimestampUs t = kStart + static_cast<TimestampUs>(i) * kMicrosPerSecond;
    const double wave = std::sin(2.0 * std::numbers::pi * i / 300.0);
    const bool flow_fault = i >= kFaultStart;          // stays: the flow alarm never clears
    const bool pressure_fault = i >= kFaultEnd + 600;  // a second fault, later
    const std::size_t before = out.size();
    engine.Process(flow, t, 50.0 + 5.0 * wave + noise(rng) + (flow_fault ? 12.0 : 0.0), out);
    engine.Process(pressure, t, 4.0 + 0.4 * wave + 0.1 * noise(rng) + (pressure_fault ? 1.5 : 0.0),
                   out);
    for (std::size_t k = before; k < out.size(); ++k) {
      const Alert& alert = out[k];
      if (alert.kind != AlertKind::kAnomaly || alert.phase != AlertPhase::kRaise) continue;
      if (alert.channel == "skid1.pump.flow" && flow_raised_at < 0) {
        ASSERT_TRUE(alert.annunciated);
        flow_raised_at = i;
        ASSERT_TRUE(engine
                        .Shelve("skid1.pump.flow", AlarmCondition::kAnomaly, t,
                                t + 4 * 3600 * kMicrosPerSecond)
                        .ok());
        EXPECT_EQ(engine.episodes().open_episodes(), 0u);
      } else if (alert.channel == "skid1.pump.pressure" && i >= kFaultEnd + 600) {
        EXPECT_TRUE(alert.annunciated) << "a fault after the shelving must be annunciated";
        EXPECT_EQ(alert.episode_first_out, "skid1.pump.pressure");
        pressure_annunciated = true;
      }
    }
  }
  EXPECT_GE(flow_raised_at, kFaultStart);
  EXPECT_TRUE(pressure_annunciated);
}

}  // namespace
}  // namespace nightjar::core
