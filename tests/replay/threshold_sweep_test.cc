// Threshold tuning on cached residuals: the re-run of the base setting reproduces the base
// replay's anomaly raises at the same times (the exactness the sweep claims in
// threshold_sweep.h), every other setting matches a re-run that learns along its own gate
// up to where that gate departs from the base's (the bound the sweep claims), the default
// grid, the selection rules of replay_data/FORMAT.md
// "Tuning", and the tuned config loading with lib/config.
//
// Outside sources: the reference for the exactness tests is the engine itself (RunReplay
// on the same recording); the scores are those of event_scoring.h, checked against
// hand-worked cases in event_scoring_test.cc; the default alarm budget is ANSI/ISA-18.2
// Table 5, ~150 alarms per operating position per day "very likely acceptable"
// (references.md, from memory).
#include "replay/threshold_sweep.h"

#include <gtest/gtest.h>

#include <array>
#include <cmath>
#include <cstdint>
#include <cstdio>
#include <fstream>
#include <numbers>
#include <optional>
#include <random>
#include <string>
#include <utility>
#include <vector>

#include "config/config.h"
#include "replay/residual_cache.h"
#include "replay/timestamp.h"
#include "replay/tuned_config_writer.h"

namespace nightjar::replay {
namespace {

constexpr core::TimestampUs kUs = core::kMicrosPerSecond;
constexpr core::TimestampUs kDay = 1773014400 * kUs;  // 2026-03-09T00:00:00Z

core::TimestampUs At(int row) { return kDay + row * kUs; }

std::string WriteText(const std::string& name, const std::string& content) {
  const ::testing::TestInfo* info = ::testing::UnitTest::GetInstance()->current_test_info();
  const std::string path = ::testing::TempDir() + "nightjar_sweep_" + info->name() + "_" + name;
  std::ofstream out(path, std::ios::binary | std::ios::trunc);
  out << content;
  EXPECT_TRUE(out.good()) << path;
  return path;
}

// Two 1 Hz channels (rows 1 s apart from At(first_row)): a flow (50 m3/h, 5-minute swing, noise sd
// 0.3) with a +4.0 step on rows [step_at, step_at + step_rows) and a temperature with a slow drift
// from drift_at.
std::string StepCsv(int rows, int step_at, int step_rows, int drift_at, std::uint64_t seed,
                    int first_row = 0) {
  std::mt19937_64 rng(seed);
  std::normal_distribution<double> noise(0.0, 1.0);
  std::string csv = "timestamp,skid.flow,skid.temp\n";
  for (int i = 0; i < rows; ++i) {
    double flow = 50.0 + 5.0 * std::sin(2.0 * std::numbers::pi * i / 300.0) + 0.3 * noise(rng);
    double temp = 40.0 + 0.5 * std::sin(2.0 * std::numbers::pi * i / 900.0) + 0.05 * noise(rng);
    if (i >= step_at && i < step_at + step_rows) flow += 4.0;
    if (drift_at >= 0 && i >= drift_at) temp += 0.004 * (i - drift_at);
    std::array<char, 64> cells{};
    std::snprintf(cells.data(), cells.size(), ",%.3f,%.3f\n", flow, temp);
    csv += FormatTimestamp(At(first_row + i));
    csv += cells.data();
  }
  return csv;
}

ReplayOptions FastOptions() {
  ReplayOptions options;
  options.engine.seed = 5;
  options.engine.defaults.warmup_samples = 300;
  options.engine.defaults.scaler.warmup_samples = 60;
  options.engine.defaults.predictor.hidden_size = 8;
  options.engine.defaults.predictor.window = 8;
  options.engine.defaults.time_of_day_features = false;
  return options;
}

TEST(ThresholdSweepTest, ChannelsArmedFromAStateAreReRunArmed) {
  // `tune --state-in`: learn on 3000 clean rows and keep each channel's checkpoint, then
  // tune on the next 250 rows, fewer than the 300-sample warm-up, with a +4 step (about
  // 13 residual sigmas) on the flow at rows 150..199. Started fresh, no channel would arm
  // and no setting could raise; started from the state, the cache marks the channels armed
  // and the candidates re-run armed, so the configured setting finds the step.
  const std::string learn_path = WriteText("learn.csv", StepCsv(3000, -1, 0, -1, 21));
  std::vector<std::pair<std::string, std::vector<std::uint8_t>>> saved;
  ReplayOptions learn = FastOptions();
  learn.on_engine_done = [&saved](const core::Engine& engine) {
    for (core::ChannelId id = 0; id < engine.channel_count(); ++id) {
      std::vector<std::uint8_t> bytes;
      engine.SaveChannel(id, bytes);
      saved.emplace_back(engine.channel_name(id), std::move(bytes));
    }
    return core::Status::Ok();
  };
  ASSERT_TRUE(RunReplay(learn_path, learn).status.ok());
  ASSERT_EQ(saved.size(), 2u);

  const std::string tune_path = WriteText("tune.csv", StepCsv(250, 150, 50, -1, 22, 3000));
  ReplayOptions tune = FastOptions();
  tune.on_engine_ready = [&saved](core::Engine& engine) {
    for (const auto& [name, bytes] : saved) {
      if (core::Status loaded = engine.LoadChannel(name, bytes); !loaded.ok()) return loaded;
    }
    return core::Status::Ok();
  };
  core::Result<ResidualCache> armed = BuildResidualCache(tune_path, tune);
  ASSERT_TRUE(armed.ok()) << armed.status().message();
  ASSERT_EQ(armed->channels.size(), 2u);
  for (const ChannelResidualCache& channel : armed->channels) {
    EXPECT_TRUE(channel.armed_at_start) << channel.name;
    EXPECT_EQ(channel.times.size(), 250u) << channel.name << ": residuals kept after the load";
    EXPECT_NEAR(channel.armed_period_s, 1.0, 1e-6) << channel.name << ": the learnt 1 s period";
  }
  const ChannelResidualCache& flow = armed->channels[0];
  ASSERT_EQ(flow.name, "skid.flow");
  EXPECT_FALSE(flow.base_anomaly_raises.empty()) << "the armed replay itself raises";
  core::ThresholdDesigner designer;
  core::Result<std::vector<core::TimestampUs>> raises =
      EvaluateSetting(flow, SettingOf(flow.options), designer);
  ASSERT_TRUE(raises.ok()) << raises.status().message();
  ASSERT_FALSE(raises->empty()) << "re-run armed from the first sample";
  EXPECT_GE(raises->front(), At(3000 + 150));
  EXPECT_LE(raises->front(), At(3000 + 199));

  // The same recording without the state: nothing arms, nothing can raise.
  core::Result<ResidualCache> fresh = BuildResidualCache(tune_path, FastOptions());
  ASSERT_TRUE(fresh.ok());
  EXPECT_FALSE(fresh->channels[0].armed_at_start);
  core::Result<std::vector<core::TimestampUs>> none =
      EvaluateSetting(fresh->channels[0], SettingOf(fresh->channels[0].options), designer);
  ASSERT_TRUE(none.ok());
  EXPECT_TRUE(none->empty());
}

void ExpectBaseReproduced(const ResidualCache& cache) {
  core::ThresholdDesigner designer;
  for (const ChannelResidualCache& channel : cache.channels) {
    core::Result<std::vector<core::TimestampUs>> raises =
        EvaluateSetting(channel, SettingOf(channel.options), designer);
    ASSERT_TRUE(raises.ok()) << raises.status().message();
    EXPECT_EQ(*raises, channel.base_anomaly_raises) << channel.name;
    core::Result<std::vector<core::TimestampUs>> own =
        EvaluateSettingOwnGate(channel, SettingOf(channel.options), designer);
    ASSERT_TRUE(own.ok()) << own.status().message();
    EXPECT_EQ(*own, channel.base_anomaly_raises) << channel.name;
  }
}

TEST(ThresholdSweepTest, BaseSettingReproducesTheReplaysRaisesExactly) {
  const std::string path = WriteText("step.csv", StepCsv(3000, 1200, 300, 2200, 11));
  core::Result<ResidualCache> cache = BuildResidualCache(path, FastOptions());
  ASSERT_TRUE(cache.ok()) << cache.status().message();
  ASSERT_EQ(cache->channels.size(), 2u);
  const ChannelResidualCache& flow = cache->channels[0];
  EXPECT_EQ(flow.name, "skid.flow");
  EXPECT_GT(flow.armed_period_s, 0.0);
  // The step is raised by the base replay (so the comparison is not of two empty lists).
  ASSERT_FALSE(flow.base_anomaly_raises.empty());
  bool step_raised = false;
  for (const core::TimestampUs t : flow.base_anomaly_raises) {
    step_raised = step_raised || (t >= At(1200) && t <= At(1200 + 15 + 10));  // 15 s on-delay
  }
  EXPECT_TRUE(step_raised);
  ExpectBaseReproduced(*cache);
}

TEST(ThresholdSweepTest, OtherBaseSettingsAreReproducedToo) {
  // An on-delay, a looser budget and other chart constants: the pipeline's gate and
  // closed-loop bookkeeping must follow the alarm of that setting, not the defaults'.
  ReplayOptions options = FastOptions();
  options.engine.defaults.thresholds.false_alarms_per_day = 8.0;
  options.engine.defaults.thresholds.cusum_k = 0.25;
  options.engine.defaults.thresholds.ewma_lambda = 0.2;
  options.engine.defaults.anomaly_alarm.on_delay_s = 3.0;
  const std::string path = WriteText("step.csv", StepCsv(3000, 1200, 900, 2200, 12));
  core::Result<ResidualCache> cache = BuildResidualCache(path, options);
  ASSERT_TRUE(cache.ok()) << cache.status().message();
  ASSERT_FALSE(cache->channels[0].base_anomaly_raises.empty());
  ExpectBaseReproduced(*cache);
  // A different setting gives different raises: the re-run is not a copy of the base.
  core::ThresholdDesigner designer;
  SweepSetting strict = SettingOf(cache->channels[0].options);
  strict.false_alarms_per_day = 0.01;
  strict.on_delay_s = 60.0;
  core::Result<std::vector<core::TimestampUs>> raises =
      EvaluateSetting(cache->channels[0], strict, designer);
  ASSERT_TRUE(raises.ok());
  EXPECT_NE(*raises, cache->channels[0].base_anomaly_raises);
}

TEST(ThresholdSweepTest, LockstepGivesWhatOneAtATimeGives) {
  const std::string path = WriteText("step.csv", StepCsv(2000, 900, 200, 1400, 13));
  core::Result<ResidualCache> cache = BuildResidualCache(path, FastOptions());
  ASSERT_TRUE(cache.ok());
  const std::vector<SweepSetting> grid = DefaultSweepGrid();
  core::ThresholdDesigner designer;
  const auto together = EvaluateSettings(cache->channels[0], grid, designer);
  ASSERT_EQ(together.size(), grid.size());
  for (std::size_t s = 0; s < grid.size(); s += 7) {
    const auto alone = EvaluateSetting(cache->channels[0], grid[s], designer);
    ASSERT_TRUE(alone.ok() && together[s].ok());
    EXPECT_EQ(*alone, together[s]->raises) << DescribeSetting(grid[s]);
  }
}

std::vector<core::TimestampUs> Before(const std::vector<core::TimestampUs>& raises,
                                      std::optional<core::TimestampUs> end) {
  std::vector<core::TimestampUs> kept;
  for (const core::TimestampUs t : raises) {
    if (!end || t < *end) kept.push_back(t);
  }
  return kept;
}

TEST(ThresholdSweepTest, SharedLearningIsExactUpToWhereASettingsOwnGateDeparts) {
  // Every grid setting on both channels against the reference re-run that learns along the
  // setting's own gate: equal raises before the departure the sweep reports, and the base
  // setting never departs. A step and a drift make alarms of different lengths, so some
  // settings do depart (the bound is not vacuous).
  const std::string path = WriteText("step.csv", StepCsv(4000, 1200, 600, 2600, 16));
  core::Result<ResidualCache> cache = BuildResidualCache(path, FastOptions());
  ASSERT_TRUE(cache.ok()) << cache.status().message();
  const std::vector<SweepSetting> grid = DefaultSweepGrid();
  core::ThresholdDesigner designer;
  int departed = 0;
  int compared_raises = 0;
  for (const ChannelResidualCache& channel : cache->channels) {
    const auto shared = EvaluateSettings(channel, grid, designer);
    ASSERT_EQ(shared.size(), grid.size());
    for (std::size_t s = 0; s < grid.size(); ++s) {
      const auto own = EvaluateSettingOwnGate(channel, grid[s], designer);
      ASSERT_TRUE(own.ok() && shared[s].ok()) << DescribeSetting(grid[s]);
      const std::optional<core::TimestampUs> departs = shared[s]->own_gate_departs;
      if (departs) ++departed;
      if (grid[s] == SettingOf(channel.options)) {
        EXPECT_FALSE(departs.has_value()) << channel.name;
        EXPECT_EQ(shared[s]->raises, *own) << channel.name;
      }
      const std::vector<core::TimestampUs> expected = Before(*own, departs);
      EXPECT_EQ(Before(shared[s]->raises, departs), expected)
          << channel.name << ": " << DescribeSetting(grid[s]);
      compared_raises += static_cast<int>(expected.size());
    }
  }
  EXPECT_GT(departed, 0);
  EXPECT_GT(compared_raises, 0);
}

TEST(ThresholdSweepTest, DefaultGridHasAbout100SettingsIncludingTheDefault) {
  const std::vector<SweepSetting> grid = DefaultSweepGrid();
  EXPECT_EQ(grid.size(), 108u);
  const SweepSetting defaults = SettingOf(core::ChannelOptions{});
  EXPECT_NE(std::find(grid.begin(), grid.end(), defaults), grid.end());
  SweepSetting loose = defaults;
  loose.false_alarms_per_day = 2.0;
  EXPECT_TRUE(MoreSensitive(loose, 5, defaults, 1));
  SweepSetting delayed = defaults;
  delayed.on_delay_s = 30.0;
  EXPECT_TRUE(MoreSensitive(defaults, 5, delayed, 1));
  EXPECT_FALSE(MoreSensitive(defaults, 5, defaults, 1));
  EXPECT_TRUE(MoreSensitive(defaults, 1, defaults, 5));
}

TEST(ThresholdSweepTest, LabelledSweepNeverLowersTheOverallF1) {
  const std::string path = WriteText("step.csv", StepCsv(3000, 1200, 300, 2200, 14));
  core::Result<ResidualCache> cache = BuildResidualCache(path, FastOptions());
  ASSERT_TRUE(cache.ok());
  SweepOptions options;
  options.labels =
      std::vector<LabelWindow>{{At(1200), At(1499), "anomaly"}, {At(2200), At(2999), "anomaly"}};
  options.jobs = 2;
  core::Result<SweepResult> result = RunSweep(*cache, options);
  ASSERT_TRUE(result.ok()) << result.status().message();
  EXPECT_TRUE(result->labelled);
  EXPECT_EQ(result->settings, 108u);
  EXPECT_EQ(result->evaluations, 216);
  EXPECT_GE(result->chosen_overall_f1, result->base_overall_f1);
  // Recomputed from the chosen settings: the reported overall F1 is what they give.
  core::ThresholdDesigner designer;
  std::vector<Raise> pooled;  // anomaly raises only, as replay scores detection
  for (std::size_t c = 0; c < cache->channels.size(); ++c) {
    const auto raises = EvaluateSetting(cache->channels[c], result->channels[c].chosen, designer);
    ASSERT_TRUE(raises.ok());
    for (const core::TimestampUs t : *raises) pooled.push_back({t, cache->channels[c].name});
  }
  EXPECT_DOUBLE_EQ(ScoreEvents(pooled, *options.labels, cache->duration_s).f1,
                   result->chosen_overall_f1);
}

TEST(ThresholdSweepTest, UnlabelledSweepKeepsTheBudgetAndTighterBudgetsAreNoMoreSensitive) {
  const std::string path = WriteText("step.csv", StepCsv(3000, 1200, 300, 2200, 15));
  core::Result<ResidualCache> cache = BuildResidualCache(path, FastOptions());
  ASSERT_TRUE(cache.ok());
  SweepOptions loose;
  loose.max_alarms_per_day = 20000.0;
  SweepOptions tight;
  tight.max_alarms_per_day = 2000.0;
  core::Result<SweepResult> a = RunSweep(*cache, loose);
  core::Result<SweepResult> b = RunSweep(*cache, tight);
  ASSERT_TRUE(a.ok() && b.ok());
  EXPECT_DOUBLE_EQ(a->per_channel_budget, 10000.0);
  for (std::size_t c = 0; c < cache->channels.size(); ++c) {
    const ChannelChoice& la = a->channels[c];
    const ChannelChoice& ti = b->channels[c];
    if (la.within_budget) {
      EXPECT_LE(la.chosen_raises_per_day, a->per_channel_budget);
    }
    if (ti.within_budget) {
      EXPECT_LE(ti.chosen_raises_per_day, b->per_channel_budget);
    }
    EXPECT_GE(la.chosen.false_alarms_per_day, ti.chosen.false_alarms_per_day) << la.channel;
  }
  SweepOptions bad;
  bad.max_alarms_per_day = 0.0;
  EXPECT_FALSE(RunSweep(*cache, bad).ok());
}

TunedConfigSource Source(const std::string& config_path, const std::string& config_text) {
  TunedConfigSource source;
  source.input = "day.csv";
  source.config_path = config_path;
  source.config_text = config_text;
  return source;
}

SweepResult TwoChannelResult() {
  SweepResult result;
  result.labelled = false;
  result.per_channel_budget = 75.0;
  result.settings = 108;
  ChannelChoice flow;
  flow.channel = "skid.flow";
  flow.chosen = {
      .false_alarms_per_day = 2.0, .cusum_k = 0.25, .ewma_lambda = 0.2, .on_delay_s = 10.0};
  flow.reason = "most sensitive";
  ChannelChoice temp;
  temp.channel = "skid.temp";
  temp.chosen = {
      .false_alarms_per_day = 0.1, .cusum_k = 1.0, .ewma_lambda = 0.05, .on_delay_s = 30.0};
  temp.reason = "least sensitive";
  result.channels = {flow, temp};
  return result;
}

TEST(TunedConfigWriterTest, WithoutAConfigTheFragmentLoadsAndAppliesTheChoices) {
  const SweepResult result = TwoChannelResult();
  core::Result<std::string> text = WriteTunedConfig(Source("", ""), result);
  ASSERT_TRUE(text.ok());
  const config::LoadResult loaded = config::LoadConfigString(*text, "tuned.yaml");
  ASSERT_TRUE(loaded.ok()) << (loaded.errors.empty() ? "" : loaded.errors[0].ToString());
  const core::ChannelOptions flow = loaded.config->Resolve("skid.flow");
  EXPECT_EQ(SettingOf(flow), result.channels[0].chosen);
  EXPECT_EQ(SettingOf(loaded.config->Resolve("skid.temp")), result.channels[1].chosen);
  // Exact names, not globs: another channel keeps the defaults.
  EXPECT_EQ(SettingOf(loaded.config->Resolve("skid.flow2")), SettingOf(core::ChannelOptions{}));
  // Deterministic: no date, same bytes twice.
  EXPECT_EQ(*text, *WriteTunedConfig(Source("", ""), result));
}

TEST(TunedConfigWriterTest, AppendsToTheUsersChannelListKeepingEverythingElse) {
  const std::string user =
      "engine:\n  seed: 9\n"
      "channels:\n"
      "  - match: \"skid.*\"\n"
      "    unit: \"m3/h\"\n"
      "    thresholds: { false_alarms_per_day: 0.25, cusum_h: 6 }\n"
      "# trailing comment\n"
      "defaults:\n  warmup_samples: 900\n";
  const SweepResult result = TwoChannelResult();
  core::Result<std::string> text = WriteTunedConfig(Source("user.yaml", user), result);
  ASSERT_TRUE(text.ok());
  const config::LoadResult loaded = config::LoadConfigString(*text, "tuned.yaml");
  ASSERT_TRUE(loaded.ok()) << (loaded.errors.empty() ? *text : loaded.errors[0].ToString());
  EXPECT_EQ(loaded.config->engine.seed, 9u);
  EXPECT_EQ(loaded.config->engine.defaults.warmup_samples, 900);
  const core::ChannelOptions flow = loaded.config->Resolve("skid.flow");
  EXPECT_EQ(flow.unit, "m3/h");
  EXPECT_EQ(flow.thresholds.cusum_h, 6.0) << "keys the tuning does not set are kept";
  EXPECT_EQ(SettingOf(flow), result.channels[0].chosen);
  EXPECT_EQ(loaded.config->overrides.size(), 3u);

  // A flow-style list cannot be appended to: a clear error naming file and line.
  core::Result<std::string> flow_style =
      WriteTunedConfig(Source("user.yaml", "channels: []\n"), result);
  ASSERT_FALSE(flow_style.ok());
  EXPECT_NE(flow_style.status().message().find("user.yaml:1:"), std::string::npos);
}

}  // namespace
}  // namespace nightjar::replay
