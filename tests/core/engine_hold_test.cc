// Sample-and-hold signals: a sampling analyser reports a new value every few samples and
// the bus re-sends the last one in between (DESIGN-NOTES §5: analysers hold their value).
// A repeat in a regular hold is no new measurement and is not charted, so one normal
// update does not count once per repeat; a steady value with rare, irregular changes and
// a continuous noisy signal are charted sample by sample as before. The hold rule (half
// the recent samples exact repeats, run lengths within a quarter of their mean) is the
// engine's own; the analyser cycle of five samples is an invented example.
#include <gtest/gtest.h>

#include <cmath>
#include <numbers>
#include <random>
#include <vector>

#include "core/engine.h"

namespace nightjar::core {
namespace {

constexpr TimestampUs kStart = 1'780'000'000LL * kMicrosPerSecond;
constexpr char kName[] = "cw2.analyser_1.chloride";

TimestampUs At(int i) { return kStart + static_cast<TimestampUs>(i) * kMicrosPerSecond; }

EngineOptions SmallModel() {
  EngineOptions options;
  options.defaults.unit = "mg/l";
  options.defaults.warmup_samples = 600;
  options.defaults.sample_period_s = 1.0;
  options.defaults.predictor.hidden_size = 8;
  options.defaults.predictor.window = 8;
  options.defaults.time_of_day_features = false;
  return options;
}

struct Fed {
  ChannelStatus status;
  int anomaly_raises = 0;
};

Fed FeedAll(const std::vector<double>& values) {
  Engine engine(SmallModel());
  const ChannelId id = *engine.AddChannel(kName);
  std::vector<Alert> out;
  for (std::size_t i = 0; i < values.size(); ++i) {
    engine.Process(id, At(static_cast<int>(i)), values[i], out);
  }
  Fed fed;
  fed.status = engine.channel_status(id);
  for (const Alert& alert : out) {
    fed.anomaly_raises += alert.kind == AlertKind::kAnomaly && alert.phase == AlertPhase::kRaise;
  }
  return fed;
}

// An analyser updating every `cycle` samples: a slow wave plus noise, held in between.
std::vector<double> Analyser(int n, int cycle, std::uint64_t seed) {
  std::mt19937_64 rng(seed);
  std::normal_distribution<double> noise(0.0, 0.4);
  std::vector<double> values;
  double held = 0.0;
  for (int i = 0; i < n; ++i) {
    if (i % cycle == 0)
      held = 20.0 + 2.0 * std::sin(2.0 * std::numbers::pi * i / 900.0) + noise(rng);
    values.push_back(held);
  }
  return values;
}

TEST(EngineHoldTest, RepeatsOfARegularHoldAreNotCharted) {
  const Fed fed = FeedAll(Analyser(6000, 5, 1));
  // Four of every five samples repeat; the share needs a few tens of samples to settle.
  EXPECT_GT(fed.status.held, 4 * 6000 / 5 - 200) << fed.status.held;
  EXPECT_LE(fed.status.held, 4 * 6000 / 5);
  EXPECT_NE(fed.status.state, ChannelState::kLearning) << "the updates alone arm the channel";
}

TEST(EngineHoldTest, AContinuousSignalIsChartedEverySample) {
  std::mt19937_64 rng(2);
  std::normal_distribution<double> noise(0.0, 0.4);
  std::vector<double> values;
  for (int i = 0; i < 3000; ++i) values.push_back(20.0 + noise(rng));
  EXPECT_EQ(FeedAll(values).status.held, 0);
}

TEST(EngineHoldTest, ASteadyValueWithIrregularChangesStaysCharted) {
  // A valve position that sits still for irregular stretches (40 to 400 samples): its
  // repeats are the signal, and a change is the news.
  std::mt19937_64 rng(3);
  std::uniform_int_distribution<int> stretch(40, 400);
  std::vector<double> values;
  double position = 30.0;
  while (values.size() < 6000) {
    const int n = stretch(rng);
    for (int i = 0; i < n; ++i) values.push_back(position);
    position = position == 30.0 ? 35.0 : 30.0;
  }
  const Fed fed = FeedAll(values);
  EXPECT_LT(fed.status.held, 600) << "irregular runs are not an update cycle";
}

TEST(EngineHoldTest, AStepOfTheAnalyserIsStillRaised) {
  // A real change of level on the analyser is still raised, once: the updates carry it.
  std::vector<double> values = Analyser(8000, 5, 4);
  for (std::size_t i = 6000; i < values.size(); ++i) values[i] += 6.0;
  const Fed fed = FeedAll(values);
  EXPECT_GE(fed.anomaly_raises, 1);
  EXPECT_LE(fed.anomaly_raises, 3);
}

}  // namespace
}  // namespace nightjar::core
