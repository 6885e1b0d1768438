// Cost of one worker checkpoint of the daemon (service/worker_state.h): every channel of
// an engine with default options (H = 32, W = 32, time-of-day features) encoded and
// written to a state folder (temp file, fsync, rename, folder fsync per channel), as
// `nightjar run` does on stop and every daemon.checkpoint_interval_s. Real time, since
// the fsyncs are most of it; the folder is under $TMPDIR (default /tmp), so the number
// is that file system's. Counters: channels, bytes_per_channel, ms_per_checkpoint.
//
//   nightjar-bench --benchmark_filter=BM_WorkerCheckpoint
#include <benchmark/benchmark.h>
#include <spdlog/spdlog.h>
#include <stdlib.h>

#include <filesystem>
#include <string>
#include <vector>

#include "core/engine.h"
#include "service/worker_state.h"

namespace nightjar::service {
namespace {

constexpr core::TimestampUs kStart = 1'709'510'400 * core::kMicrosPerSecond;

void BM_WorkerCheckpoint(benchmark::State& state) {
  const auto channels = static_cast<int>(state.range(0));
  core::Engine engine(core::EngineOptions{});
  std::vector<core::Alert> alerts;
  for (int c = 0; c < channels; ++c) {
    const core::ChannelId id = *engine.AddChannel("cw2.bench_" + std::to_string(c) + ".flow");
    // A few samples so every part of the state is in use; the size does not depend on it.
    for (int i = 0; i < 40; ++i) {
      engine.Process(id, kStart + i * core::kMicrosPerSecond, 50.0 + (i % 7), alerts);
    }
  }
  std::string dir = (std::filesystem::temp_directory_path() / "nightjar-bench-XXXXXX").string();
  if (::mkdtemp(dir.data()) == nullptr) {
    state.SkipWithError("mkdtemp failed");
    return;
  }
  spdlog::set_level(spdlog::level::warn);  // one info line per checkpoint otherwise
  WorkerStateStore store(0, WorkerStateOptions{"", dir, 1});
  CheckpointResult last;
  double total_s = 0.0;
  for (auto _ : state) {
    last = store.Save(engine, "bench");
    total_s += last.seconds;
  }
  spdlog::set_level(spdlog::level::info);
  std::error_code ignored;
  std::filesystem::remove_all(dir, ignored);
  if (last.failed != 0 || last.written != static_cast<std::size_t>(channels)) {
    state.SkipWithError("checkpoint failed");
    return;
  }
  state.counters["channels"] = channels;
  state.counters["bytes_per_channel"] =
      static_cast<double>(last.bytes) / static_cast<double>(channels);
  state.counters["ms_per_checkpoint"] = 1e3 * total_s / static_cast<double>(state.iterations());
}
BENCHMARK(BM_WorkerCheckpoint)
    ->Arg(1000)
    ->Unit(benchmark::kMillisecond)
    ->UseRealTime()
    ->Iterations(3);

}  // namespace
}  // namespace nightjar::service
