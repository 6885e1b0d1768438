// Cost of one worker checkpoint of the daemon (service/worker_state.h): every channel of
// an engine with default options (H = 32, W = 32, time-of-day features) encoded and
// written to a state folder (temp file, fsync, rename per channel, then one folder fsync
// for the checkpoint), as `nightjar run` does on stop and every daemon.checkpoint_interval_s. Real
// time, since the fsyncs are most of it; the folder is under $TMPDIR (default /tmp), so the number
// is that file system's. Counters: channels, bytes_per_channel, ms_per_checkpoint.
// BM_WorkerCheckpoint writes every channel (what a checkpoint cost before the worker kept
// track of changed channels); BM_WorkerCheckpointChanged/<channels>/<percent> writes only
// the given percentage of them, marked changed before each checkpoint, as the worker does
// for the channels that had a sample, alert, command or reset since the last one.
//
//   nightjar-bench --benchmark_filter=BM_WorkerCheckpoint
#include <benchmark/benchmark.h>
#include <spdlog/spdlog.h>
#include <stdlib.h>

#include <filesystem>
#include <memory>
#include <string>
#include <vector>

#include "core/engine.h"
#include "service/worker_state.h"

namespace nightjar::service {
namespace {

constexpr core::TimestampUs kStart = 1'709'510'400 * core::kMicrosPerSecond;

// An engine of `channels` default channels that have seen a few samples each.
std::unique_ptr<core::Engine> BenchEngine(int channels) {
  auto engine = std::make_unique<core::Engine>(core::EngineOptions{});
  std::vector<core::Alert> alerts;
  for (int c = 0; c < channels; ++c) {
    const core::ChannelId id = *engine->AddChannel("cw2.bench_" + std::to_string(c) + ".flow");
    // A few samples so every part of the state is in use; the size does not depend on it.
    for (int i = 0; i < 40; ++i) {
      engine->Process(id, kStart + i * core::kMicrosPerSecond, 50.0 + (i % 7), alerts);
    }
  }
  return engine;
}

// Times store.Save() per iteration; `changed_percent` < 0 writes every channel (no
// tracking), else that share of the channels is marked unsaved before each checkpoint.
void RunCheckpoints(benchmark::State& state, int channels, int changed_percent) {
  const std::unique_ptr<core::Engine> engine = BenchEngine(channels);
  std::string dir = (std::filesystem::temp_directory_path() / "nightjar-bench-XXXXXX").string();
  if (::mkdtemp(dir.data()) == nullptr) {
    state.SkipWithError("mkdtemp failed");
    return;
  }
  spdlog::set_level(spdlog::level::warn);  // one info line per checkpoint otherwise
  WorkerStateStore store(0, WorkerStateOptions{"", dir, 1, {}});
  std::vector<char> unsaved(static_cast<std::size_t>(channels), 0);
  const int changed = changed_percent < 0 ? channels : channels * changed_percent / 100;
  CheckpointResult last;
  double total_s = 0.0;
  for (auto _ : state) {
    for (int c = 0; c < changed; ++c) unsaved[static_cast<std::size_t>(c)] = 1;
    last = store.Save(*engine, "bench", changed_percent < 0 ? nullptr : &unsaved);
    total_s += last.seconds;
  }
  spdlog::set_level(spdlog::level::info);
  std::error_code ignored;
  std::filesystem::remove_all(dir, ignored);
  if (last.failed != 0 || last.written != static_cast<std::size_t>(changed)) {
    state.SkipWithError("checkpoint failed");
    return;
  }
  state.counters["channels"] = channels;
  state.counters["written"] = static_cast<double>(last.written);
  state.counters["bytes_per_channel"] =
      last.written == 0 ? 0.0 : static_cast<double>(last.bytes) / static_cast<double>(last.written);
  state.counters["ms_per_checkpoint"] = 1e3 * total_s / static_cast<double>(state.iterations());
}

void BM_WorkerCheckpoint(benchmark::State& state) {
  RunCheckpoints(state, static_cast<int>(state.range(0)), -1);
}
BENCHMARK(BM_WorkerCheckpoint)
    ->Arg(1000)
    ->Unit(benchmark::kMillisecond)
    ->UseRealTime()
    ->Iterations(3);

void BM_WorkerCheckpointChanged(benchmark::State& state) {
  RunCheckpoints(state, static_cast<int>(state.range(0)), static_cast<int>(state.range(1)));
}
BENCHMARK(BM_WorkerCheckpointChanged)
    ->Args({1000, 100})
    ->Args({1000, 10})
    ->Args({1000, 0})
    ->Unit(benchmark::kMillisecond)
    ->UseRealTime()
    ->Iterations(3);

}  // namespace
}  // namespace nightjar::service
