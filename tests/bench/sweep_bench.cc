// Cost of threshold tuning on the demo day (replay_data/cw2_day.csv.gz, five 1 Hz
// channels, 86 400 rows), compared with the replay it saves.
//
// BM_ReplayDay: one RunReplay of the demo day (the model, the charts, everything), with
//   the residual tap recording the cache. This is the one pass `nightjar tune` makes.
// BM_SweepOneSetting: the 108-setting sweep as `nightjar tune` runs it, for every channel
//   (the shared learning pass, then each setting's threshold design, charts and alarm; no
//   model), reported per setting. Its counters, all as fractions of one cached replay pass
//   (BuildResidualCache of the same day, CPU time, measured once in this process):
//   ratio_to_replay, one setting; ratio_100_settings, 100 of them (must stay under 0.20);
//   ratio_sweep, the whole 108-setting sweep.
// BM_SweepLearningPass: the shared part alone (EvaluateSettings with the base setting
//   only): ratio_to_replay.
// BM_SweepDesigns: the threshold designs of the grid (36 distinct, cached after that) that
//   BM_SweepOneSetting includes: ratio_to_replay.
// BM_SweepOwnGateSetting: one setting re-run with a monitor of its own learning along its
//   own gate (EvaluateSettingOwnGate, the sweep's reference and its former way), for
//   every channel: ratio_to_replay, and ratio_to_shared, its cost over one setting of
//   BM_SweepOneSetting's (measured here too).
// Both on one thread.
#include <benchmark/benchmark.h>

#include <algorithm>
#include <chrono>
#include <ctime>
#include <span>
#include <string>
#include <vector>

#include "replay/residual_cache.h"
#include "replay/threshold_sweep.h"

namespace {

using nightjar::replay::ResidualCache;

const std::string& DemoDay() {
  static const std::string path = std::string(NIGHTJAR_SOURCE_DIR) + "/replay_data/cw2_day.csv.gz";
  return path;
}

double CpuSeconds() {
  timespec ts{};
  clock_gettime(CLOCK_THREAD_CPUTIME_ID, &ts);
  return static_cast<double>(ts.tv_sec) + 1e-9 * static_cast<double>(ts.tv_nsec);
}

// The cache and the CPU seconds of the replay that built it, once per process.
struct CachedDay {
  ResidualCache cache;
  double replay_cpu_s = 0.0;
};

const CachedDay& Cached() {
  static const CachedDay day = [] {
    CachedDay built;
    const double start = CpuSeconds();
    nightjar::core::Result<ResidualCache> cache =
        nightjar::replay::BuildResidualCache(DemoDay(), {});
    built.replay_cpu_s = CpuSeconds() - start;
    if (cache.ok()) built.cache = std::move(*cache);
    return built;
  }();
  return day;
}

void BM_ReplayDay(benchmark::State& state) {
  for (auto _ : state) {
    nightjar::core::Result<ResidualCache> cache =
        nightjar::replay::BuildResidualCache(DemoDay(), {});
    if (!cache.ok()) {
      state.SkipWithError(cache.status().message().c_str());
      return;
    }
    benchmark::DoNotOptimize(cache->channels.data());
  }
  state.SetItemsProcessed(state.iterations() * 86400 * 5);
}
BENCHMARK(BM_ReplayDay)->Unit(benchmark::kSecond)->Iterations(1);

// CPU seconds per iteration of one pass over the day's channels.
template <typename Pass>
double CpuPerIteration(benchmark::State& state, const Pass& pass) {
  double cpu = 0.0;
  for (auto _ : state) {
    const double start = CpuSeconds();
    nightjar::core::ThresholdDesigner designer;
    for (const nightjar::replay::ChannelResidualCache& channel : Cached().cache.channels) {
      pass(channel, designer);
    }
    cpu += CpuSeconds() - start;
  }
  return cpu / static_cast<double>(state.iterations());
}

double SharedSecondsPerSetting() {
  static const double seconds = [] {
    const std::vector<nightjar::replay::SweepSetting> grid = nightjar::replay::DefaultSweepGrid();
    double best = 0.0;
    for (int round = 0; round < 2; ++round) {
      const double start = CpuSeconds();
      nightjar::core::ThresholdDesigner designer;
      for (const nightjar::replay::ChannelResidualCache& channel : Cached().cache.channels) {
        auto raises = nightjar::replay::EvaluateSettings(channel, grid, designer);
        benchmark::DoNotOptimize(raises.data());
      }
      const double took = (CpuSeconds() - start) / static_cast<double>(grid.size());
      best = round == 0 ? took : std::min(best, took);
    }
    return best;
  }();
  return seconds;
}

void BM_SweepOneSetting(benchmark::State& state) {
  const CachedDay& day = Cached();
  if (day.cache.channels.empty()) {
    state.SkipWithError("demo day could not be replayed");
    return;
  }
  const std::vector<nightjar::replay::SweepSetting> grid = nightjar::replay::DefaultSweepGrid();
  const double sweep = CpuPerIteration(state, [&](const auto& channel, auto& designer) {
    auto raises = nightjar::replay::EvaluateSettings(channel, grid, designer);
    benchmark::DoNotOptimize(raises.data());
  });
  const double per_setting = sweep / static_cast<double>(grid.size());
  state.counters["s_per_setting"] = per_setting;
  state.counters["ratio_to_replay"] = per_setting / day.replay_cpu_s;
  state.counters["ratio_100_settings"] = 100.0 * per_setting / day.replay_cpu_s;
  state.counters["ratio_sweep"] = sweep / day.replay_cpu_s;
}
BENCHMARK(BM_SweepOneSetting)->Unit(benchmark::kSecond)->Iterations(3);

void BM_SweepLearningPass(benchmark::State& state) {
  const CachedDay& day = Cached();
  if (day.cache.channels.empty()) {
    state.SkipWithError("demo day could not be replayed");
    return;
  }
  const double pass = CpuPerIteration(state, [](const auto& channel, auto& designer) {
    const nightjar::replay::SweepSetting base = nightjar::replay::SettingOf(channel.options);
    auto raises = nightjar::replay::EvaluateSettings(
        channel, std::span<const nightjar::replay::SweepSetting>(&base, 1), designer);
    benchmark::DoNotOptimize(raises.data());
  });
  state.counters["ratio_to_replay"] = pass / day.replay_cpu_s;
}
BENCHMARK(BM_SweepLearningPass)->Unit(benchmark::kSecond)->Iterations(3);

void BM_SweepDesigns(benchmark::State& state) {
  const CachedDay& day = Cached();
  if (day.cache.channels.empty()) {
    state.SkipWithError("demo day could not be replayed");
    return;
  }
  const std::vector<nightjar::replay::SweepSetting> grid = nightjar::replay::DefaultSweepGrid();
  double cpu = 0.0;
  for (auto _ : state) {
    const double start = CpuSeconds();
    nightjar::core::ThresholdDesigner designer;
    for (const nightjar::replay::ChannelResidualCache& channel : day.cache.channels) {
      for (const nightjar::replay::SweepSetting& setting : grid) {
        auto designed =
            designer.Design(nightjar::replay::WithSetting(channel.options, setting).thresholds,
                            channel.armed_period_s);
        benchmark::DoNotOptimize(designed.ok());
      }
    }
    cpu += CpuSeconds() - start;
  }
  state.counters["ratio_to_replay"] =
      cpu / static_cast<double>(state.iterations()) / day.replay_cpu_s;
}
BENCHMARK(BM_SweepDesigns)->Unit(benchmark::kSecond)->Iterations(3);

void BM_SweepOwnGateSetting(benchmark::State& state) {
  const CachedDay& day = Cached();
  if (day.cache.channels.empty()) {
    state.SkipWithError("demo day could not be replayed");
    return;
  }
  const double pass = CpuPerIteration(state, [](const auto& channel, auto& designer) {
    auto raises = nightjar::replay::EvaluateSettingOwnGate(
        channel, nightjar::replay::SettingOf(channel.options), designer);
    benchmark::DoNotOptimize(raises.ok());
  });
  state.counters["ratio_to_replay"] = pass / day.replay_cpu_s;
  state.counters["ratio_to_shared"] = pass / SharedSecondsPerSetting();
}
BENCHMARK(BM_SweepOwnGateSetting)->Unit(benchmark::kSecond)->Iterations(3);

}  // namespace
