// Context inputs (ContextOptions, core/engine_options.h): a channel's model takes the other
// channels of its asset as inputs. A flow that follows its pump's current a second later
// is forecast far better with them than from its own history; the per-sample step with
// context allocates nothing; the set is fixed when the model
// starts; a channel grouped with no other, or max_channels 0, takes none; a checkpoint carries the
// set and what was last read, so restored channels continue bit for bit in either load order.
#include <gtest/gtest.h>

#include <cmath>
#include <numbers>
#include <random>
#include <string>
#include <vector>

#include "core/engine.h"
#include "support/allocation_counter.h"
#include "support/same_alerts.h"

namespace nightjar::core {
namespace {

constexpr TimestampUs kStart = 1'780'000'000LL * kMicrosPerSecond;  // 2026-05-28
constexpr char kCurrent[] = "cw2.pump_a.current";
constexpr char kFlow[] = "cw2.pump_a.flow";

TimestampUs At(int i) { return kStart + static_cast<TimestampUs>(i) * kMicrosPerSecond; }

EngineOptions SmallModel() {
  EngineOptions options;
  options.defaults.warmup_samples = 3000;
  options.defaults.predictor.hidden_size = 16;
  options.defaults.predictor.window = 16;
  return options;
}

// A pump's motor current wandering around 40 A (AR(1), phi 0.98: nothing in its own past
// says where it goes next) and the flow it drives, which follows a second later (the
// inertia of the pump and the water column) by 2 m3/h per ampere of the current's change,
// plus 0.05 m3/h of sensor noise. The lag is what context can use: the flow's next value
// is forecast before the current's next value arrives (core/engine_options.h).
struct DrivenPair {
  std::vector<double> current;
  std::vector<double> flow;
};

DrivenPair MakeDrivenPair(int samples) {
  std::mt19937_64 rng(23);
  std::normal_distribution<double> drive(0.0, 0.5);
  std::normal_distribution<double> noise(0.0, 0.05);
  DrivenPair pair;
  double current = 40.0;
  double flow = 120.0;
  double last_change = 0.0;
  for (int i = 0; i < samples; ++i) {
    const double next = 40.0 + 0.98 * (current - 40.0) + drive(rng);
    flow += 2.0 * last_change;
    last_change = next - current;
    current = next;
    pair.current.push_back(current);
    pair.flow.push_back(flow + noise(rng));
  }
  return pair;
}

struct PairIds {
  ChannelId current = 0;
  ChannelId flow = 0;
};

// Each second the current is processed before the flow, as a scan that reads both.
void Feed(Engine& engine, PairIds ids, const DrivenPair& pair, int from, int to,
          std::vector<Alert>& out) {
  for (int i = from; i < to; ++i) {
    const auto k = static_cast<std::size_t>(i);
    engine.Process(ids.current, At(i), pair.current[k], out);
    engine.Process(ids.flow, At(i), pair.flow[k], out);
  }
}

PairIds AddPair(Engine& engine) {
  const ChannelId current = *engine.AddChannel(kCurrent);
  return {current, *engine.AddChannel(kFlow)};
}

// Mean squared one-step error of the flow's forecast over [from, to), once armed.
double FlowForecastMse(Engine& engine, PairIds ids, const DrivenPair& pair, int from, int to) {
  std::vector<Alert> out;
  double sum = 0.0;
  for (int i = from; i < to; ++i) {
    const auto k = static_cast<std::size_t>(i);
    engine.Process(ids.current, At(i), pair.current[k], out);
    engine.Process(ids.flow, At(i), pair.flow[k], out);
    const double error = pair.flow[k] - engine.channel_status(ids.flow).last_expected;
    sum += error * error;
  }
  return sum / static_cast<double>(to - from);
}

TEST(EngineContextTest, AFlowDrivenByItsPumpIsForecastFromThePumpsCurrent) {
  constexpr int kLearn = 6000;
  constexpr int kTotal = 8000;
  const DrivenPair pair = MakeDrivenPair(kTotal);

  EngineOptions with_options = SmallModel();
  Engine with(with_options);
  const PairIds a = AddPair(with);
  std::vector<Alert> alerts;
  Feed(with, a, pair, 0, kLearn, alerts);

  EngineOptions without_options = SmallModel();
  without_options.defaults.context.from_asset = false;
  Engine without(without_options);
  const PairIds b = AddPair(without);
  Feed(without, b, pair, 0, kLearn, alerts);

  ASSERT_EQ(with.channel(a.flow).context_names(), std::vector<std::string>{kCurrent});
  ASSERT_EQ(with.channel(a.current).context_names(), std::vector<std::string>{kFlow});
  EXPECT_TRUE(without.channel(b.flow).context_names().empty());

  // Without context the flow's next change is as unforeseeable as the current's: its
  // forecast error is about the current's innovation times 2 m3/h/A, 1 m3/h sd (mean square
  // 1). With the current's last change as an input only the sensor noise and the model's
  // own error remain. The bound leaves room for a small model's error.
  const double mse_with = FlowForecastMse(with, a, pair, kLearn, kTotal);
  const double mse_without = FlowForecastMse(without, b, pair, kLearn, kTotal);
  EXPECT_GT(mse_without, 0.6) << "the premise: the flow's own history does not foretell it";
  EXPECT_LT(mse_with, 0.25 * mse_without) << "with " << mse_with << ", without " << mse_without;
}

TEST(EngineContextTest, PerSampleStepWithContextDoesNotAllocate) {
  // Two in-control channels of one asset (a 5-minute oscillation and noise each), so the
  // measured stretch raises nothing: an alert may allocate.
  Engine engine(SmallModel());
  const ChannelId a = *engine.AddChannel("cw2.pump_a.flow");
  const ChannelId b = *engine.AddChannel("cw2.pump_a.discharge_pressure");
  std::mt19937_64 rng(5);
  std::normal_distribution<double> noise(0.0, 0.3);
  auto value = [&](int i, double phase) {
    return 50.0 + 5.0 * std::sin(2.0 * std::numbers::pi * i / 300.0 + phase) + noise(rng);
  };
  std::vector<Alert> alerts;
  alerts.reserve(64);
  for (int i = 0; i < 4000; ++i) {
    engine.Process(a, At(i), value(i, 0.0), alerts);
    engine.Process(b, At(i), value(i, 1.0), alerts);
  }
  ASSERT_EQ(engine.channel(a).context_names().size(), 1u);
  ASSERT_EQ(engine.channel_status(a).state, ChannelState::kArmed);
  std::vector<double> values;
  for (int i = 4000; i < 6000; ++i) {
    values.push_back(value(i, 0.0));
    values.push_back(value(i, 1.0));
  }
  const std::size_t alerts_before = alerts.size();
  {
    testing::AllocationCounter counter;
    Eigen::internal::set_is_malloc_allowed(false);
    for (int i = 4000; i < 6000; ++i) {
      const auto k = static_cast<std::size_t>(2 * (i - 4000));
      engine.Process(a, At(i), values[k], alerts);
      engine.Process(b, At(i), values[k + 1], alerts);
    }
    Eigen::internal::set_is_malloc_allowed(true);
    EXPECT_EQ(counter.count(), 0u);
  }
  EXPECT_EQ(alerts.size(), alerts_before) << "an alert may allocate; this run must have none";
}

TEST(EngineContextTest, AChannelAloneOrWithNoContextSlotsTakesNone) {
  EngineOptions options = SmallModel();
  options.defaults.warmup_samples = 400;
  Engine engine(options);
  const ChannelId solo = *engine.AddChannel("ambient");  // no dot: grouped with no other
  ChannelOptions none = options.defaults;
  none.context.max_channels = 0;
  const ChannelId pair_a = *engine.AddChannel("skid.a", none);
  const ChannelId pair_b = *engine.AddChannel("skid.b");
  const ChannelId pair_c = *engine.AddChannel("skid.c");
  std::mt19937_64 rng(3);
  std::normal_distribution<double> noise(0.0, 1.0);
  std::vector<Alert> alerts;
  for (int i = 0; i < 500; ++i) {
    for (const ChannelId id : {solo, pair_a, pair_b, pair_c}) {
      engine.Process(id, At(i), 20.0 + noise(rng), alerts);
    }
  }
  EXPECT_TRUE(engine.channel(solo).context_names().empty());
  EXPECT_TRUE(engine.channel(pair_a).context_names().empty());
  // The others of the asset, in the order the engine met them.
  EXPECT_EQ(engine.channel(pair_b).context_names(), (std::vector<std::string>{"skid.a", "skid.c"}));
  EXPECT_EQ(engine.channel(pair_c).context_names(), (std::vector<std::string>{"skid.a", "skid.b"}));
}

TEST(EngineContextTest, MaxChannelsKeepsTheFirstMet) {
  EngineOptions options = SmallModel();
  options.defaults.warmup_samples = 400;
  options.defaults.context.max_channels = 2;
  Engine engine(options);
  std::vector<ChannelId> ids;
  for (const char* name : {"skid.a", "skid.b", "skid.c", "skid.d"}) {
    ids.push_back(*engine.AddChannel(name));
  }
  std::vector<Alert> alerts;
  for (int i = 0; i < 500; ++i) {
    for (const ChannelId id : ids) engine.Process(id, At(i), 20.0 + 0.1 * std::sin(i + id), alerts);
  }
  EXPECT_EQ(engine.channel(ids[3]).context_names(), (std::vector<std::string>{"skid.a", "skid.b"}));
  EXPECT_EQ(engine.channel(ids[0]).context_names(), (std::vector<std::string>{"skid.b", "skid.c"}));
}

using testing::ExpectSameAlerts;

// Restores both channels from checkpoints taken mid-run, the flow first (its context
// channel is then unknown to the engine until the current is loaded), and checks the
// restored pair continues as the uninterrupted one, byte for byte.
TEST(EngineContextTest, RestoredChannelsContinueBitForBitInEitherLoadOrder) {
  constexpr int kRestoreAt = 4000;
  constexpr int kTotal = 5000;
  DrivenPair pair = MakeDrivenPair(kTotal);
  // A pump trip at 4500: the current falls by 15 A and the flow with it, so the restored
  // run has alarms to match.
  for (int i = 4500; i < kTotal; ++i) {
    pair.current[static_cast<std::size_t>(i)] -= 15.0;
    pair.flow[static_cast<std::size_t>(i)] -= 30.0;
  }
  const EngineOptions options = SmallModel();
  Engine uninterrupted(options);
  const PairIds a = AddPair(uninterrupted);
  std::vector<Alert> before;
  Feed(uninterrupted, a, pair, 0, kRestoreAt, before);
  ASSERT_EQ(uninterrupted.channel_status(a.flow).state, ChannelState::kArmed);
  std::vector<std::uint8_t> flow_bytes;
  std::vector<std::uint8_t> current_bytes;
  uninterrupted.SaveChannel(a.flow, flow_bytes);
  uninterrupted.SaveChannel(a.current, current_bytes);

  Engine restored(options);
  ASSERT_TRUE(restored.LoadChannel(kFlow, flow_bytes).ok());
  ASSERT_TRUE(restored.LoadChannel(kCurrent, current_bytes).ok());
  const PairIds b{*restored.FindChannel(kCurrent), *restored.FindChannel(kFlow)};
  EXPECT_EQ(restored.channel(b.flow).context_names(), std::vector<std::string>{kCurrent});

  std::vector<Alert> after_a;
  std::vector<Alert> after_b;
  Feed(uninterrupted, a, pair, kRestoreAt, kTotal, after_a);
  Feed(restored, b, pair, kRestoreAt, kTotal, after_b);
  ExpectSameAlerts(after_a, after_b);
  EXPECT_FALSE(after_a.empty()) << "the trip should raise";

  for (const ChannelId id : {a.current, a.flow}) {
    const std::string& name = uninterrupted.channel_name(id);
    std::vector<std::uint8_t> end_a;
    std::vector<std::uint8_t> end_b;
    uninterrupted.SaveChannel(id, end_a);
    restored.SaveChannel(*restored.FindChannel(name), end_b);
    EXPECT_EQ(end_a, end_b) << name;
  }
}

}  // namespace
}  // namespace nightjar::core
