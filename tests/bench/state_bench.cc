// Cost of a channel checkpoint (core/channel_state.h) with default options (H = 32,
// W = 32, time-of-day features): encoding one armed channel (Engine::SaveChannel) and
// restoring it into another engine (Engine::LoadChannel, which builds a fresh pipeline,
// checks the CRC and decodes). No file I/O: that is the disk's cost, not ours.
//
// BM_StateSaveLoad reports bytes/channel and, as ratio_to_train_step, one save + load
// divided by one Engine::Process training step of the same channel, timed in the same
// run right after (CPU time, 2000 steps): how many samples' worth of training a
// checkpoint costs.
//
// Measured 2026-12-02 (Release, NIGHTJAR_NATIVE, 2 shared cores at load ~10, CPU time,
// 3 repetitions): 63 524 bytes/channel; save + load 86 us, 11.3 training steps of 7.7 us;
// save alone 34 us (1.75 GB/s).
#include <benchmark/benchmark.h>

#include <chrono>
#include <cmath>
#include <ctime>
#include <numbers>
#include <random>
#include <vector>

#include "core/engine.h"

namespace nightjar::core {
namespace {

constexpr TimestampUs kStart = 1'709'510'400 * kMicrosPerSecond;
constexpr char kChannel[] = "cw2.pump_a.flow";

double CpuSeconds() {
  timespec ts{};
  clock_gettime(CLOCK_THREAD_CPUTIME_ID, &ts);
  return static_cast<double>(ts.tv_sec) + 1e-9 * static_cast<double>(ts.tv_nsec);
}

class FlowFeed {
 public:
  double Next() {
    const auto t = static_cast<double>(k_++);
    return 180.0 + 25.0 * std::sin(2.0 * std::numbers::pi * t / 4096.0) + noise_(rng_);
  }
  TimestampUs Time() const { return kStart + static_cast<TimestampUs>(k_) * kMicrosPerSecond; }

 private:
  std::mt19937_64 rng_{20240304};
  std::normal_distribution<double> noise_{0.0, 1.5};
  std::int64_t k_ = 0;
};

void BM_StateSaveLoad(benchmark::State& state) {
  Engine engine(EngineOptions{});
  const ChannelId id = *engine.AddChannel(kChannel);
  FlowFeed feed;
  std::vector<Alert> alerts;
  const int warmup = ChannelOptions{}.warmup_samples + 100;
  for (int i = 0; i < warmup; ++i) {
    const TimestampUs t = feed.Time();
    engine.Process(id, t, feed.Next(), alerts);
  }
  if (engine.channel_status(id).state != ChannelState::kArmed) {
    state.SkipWithError("channel did not arm");
    return;
  }
  Engine restored(EngineOptions{});
  std::vector<std::uint8_t> bytes;
  bytes.reserve(1 << 17);
  const double cpu_start = CpuSeconds();
  std::int64_t rounds = 0;
  for (auto _ : state) {
    bytes.clear();
    engine.SaveChannel(id, bytes);
    const Status loaded = restored.LoadChannel(kChannel, bytes);
    benchmark::DoNotOptimize(loaded.ok());
    ++rounds;
  }
  const double save_load_s = (CpuSeconds() - cpu_start) / static_cast<double>(rounds);

  constexpr int kSteps = 2000;
  const double train_start = CpuSeconds();
  for (int i = 0; i < kSteps; ++i) {
    const TimestampUs t = feed.Time();
    engine.Process(id, t, feed.Next(), alerts);
  }
  const double step_s = (CpuSeconds() - train_start) / kSteps;
  state.counters["bytes/channel"] = static_cast<double>(bytes.size());
  state.counters["save_load_us"] = 1e6 * save_load_s;
  state.counters["train_step_us"] = 1e6 * step_s;
  state.counters["ratio_to_train_step"] = save_load_s / step_s;
}
BENCHMARK(BM_StateSaveLoad)->Unit(benchmark::kMicrosecond);

void BM_StateSave(benchmark::State& state) {
  Engine engine(EngineOptions{});
  const ChannelId id = *engine.AddChannel(kChannel);
  FlowFeed feed;
  std::vector<Alert> alerts;
  for (int i = 0; i < ChannelOptions{}.warmup_samples + 100; ++i) {
    const TimestampUs t = feed.Time();
    engine.Process(id, t, feed.Next(), alerts);
  }
  std::vector<std::uint8_t> bytes;
  bytes.reserve(1 << 17);
  for (auto _ : state) {
    bytes.clear();
    engine.SaveChannel(id, bytes);
    benchmark::DoNotOptimize(bytes.data());
  }
  state.SetBytesProcessed(state.iterations() * static_cast<std::int64_t>(bytes.size()));
}
BENCHMARK(BM_StateSave)->Unit(benchmark::kMicrosecond);

}  // namespace
}  // namespace nightjar::core
