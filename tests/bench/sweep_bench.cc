// Cost of threshold tuning on the demo day (replay_data/cw2_day.csv.gz, five 1 Hz
// channels, 86 400 rows), compared with the replay it saves.
//
// BM_ReplayDay: one RunReplay of the demo day (the model, the charts, everything), with
//   the residual tap recording the cache. This is the one pass `nightjar tune` makes.
// BM_SweepOneSetting: one setting re-run on the cached day for every channel (charts,
//   threshold design and alarm; no model), 108 settings per iteration in lockstep as
//   `nightjar tune` runs them, reported per setting. Its counter ratio_to_replay is the
//   cost of one setting as a fraction of BM_ReplayDay's (measured here in the same
//   process, CPU time); 100 settings must stay under 0.20 in total, i.e. 0.002 each.
// Both on one thread.
#include <benchmark/benchmark.h>

#include <chrono>
#include <ctime>
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

void BM_SweepOneSetting(benchmark::State& state) {
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
      auto raises = nightjar::replay::EvaluateSettings(channel, grid, designer);
      benchmark::DoNotOptimize(raises.data());
    }
    cpu += CpuSeconds() - start;
  }
  const double per_setting =
      cpu / static_cast<double>(state.iterations()) / static_cast<double>(grid.size());
  state.counters["s_per_setting"] = per_setting;
  state.counters["ratio_to_replay"] = per_setting / day.replay_cpu_s;
  state.counters["ratio_100_settings"] = 100.0 * per_setting / day.replay_cpu_s;
}
BENCHMARK(BM_SweepOneSetting)->Unit(benchmark::kSecond)->Iterations(2);

}  // namespace
