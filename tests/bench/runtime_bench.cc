// Throughput of the daemon's plumbing, network-thread side to engine and back:
// SampleIntake (topic pattern + JSON payload parse) -> ShardFor -> bounded worker queue ->
// EngineWorker -> alert and state publishes, over FakeBus (tests/fakes/fake_bus.h) so no
// socket is timed. The forecaster is last_value so the engine's LSTM (timed in
// engine_bench.cc) does not hide the plumbing. 200 channels, samples round-robin.
//
// BM_RuntimeIntake/W: W engine workers. items_per_second is samples per second from the
//   first Deliver() of a batch until every worker has processed the whole batch; dropped
//   counts samples refused at a full queue (capacity 1 << 20, so 0 is expected).
#include <benchmark/benchmark.h>

#include <chrono>
#include <memory>
#include <string>
#include <thread>
#include <vector>

#include "config/config.h"
#include "fakes/fake_bus.h"
#include "service/runtime.h"
#include "service/service_options.h"

namespace nightjar::service {
namespace {

std::string Config(int workers) {
  return std::string(
             "defaults:\n"
             "  forecaster: last_value\n"
             "  warmup_samples: 200\n"
             "  sample_period_s: 1\n"
             "  scaler: { warmup_samples: 20 }\n"
             "  sensor: { flatline_samples: 0, gap_periods: 100000 }\n"
             "mqtt:\n"
             "  subscriptions:\n"
             "    - topic: \"brackwater/{area}/{asset}/{signal}\"\n"
             "      channel: \"{area}.{asset}.{signal}\"\n"
             "      payload: json\n"
             "      time_field: t\n"
             "      time_unit: epoch_s\n"
             "daemon:\n"
             "  state_dir: \"\"\n"
             "  queue_capacity: 1048576\n"
             "  workers: ") +
         std::to_string(workers) + "\n";
}

core::TimestampUs Now() {
  return std::chrono::duration_cast<std::chrono::microseconds>(
             std::chrono::system_clock::now().time_since_epoch())
      .count();
}

void BM_RuntimeIntake(benchmark::State& state) {
  const int workers = static_cast<int>(state.range(0));
  config::LoadResult loaded = config::LoadConfigString(Config(workers), "bench.yaml");
  if (!loaded.ok()) {
    state.SkipWithError(loaded.errors[0].ToString().c_str());
    return;
  }
  auto config = std::make_shared<const config::LoadedConfig>(*loaded.config);
  core::Result<ServiceOptions> options = BuildServiceOptions(*config, "bench.yaml", std::nullopt);
  if (!options.ok()) {
    state.SkipWithError(options.status().message().c_str());
    return;
  }
  testing::FakeBus bus;
  auto runtime = Runtime::Create(*options, config, bus, Now);
  if (!runtime.ok() || !(*runtime)->Start().ok()) {
    state.SkipWithError("runtime did not start");
    return;
  }
  constexpr int kChannels = 200;
  constexpr int kBatch = 20'000;  // 100 samples per channel
  std::vector<std::string> topics;
  for (int c = 0; c < kChannels; ++c) {
    topics.push_back(std::string("brackwater/cw2/asset_")
                         .append(std::to_string(c / 8))
                         .append("/signal_")
                         .append(std::to_string(c % 8)));
  }
  std::vector<std::string> payloads;
  int next = 0;
  const auto make_batch = [&] {
    payloads.clear();
    for (int k = 0; k < kBatch / kChannels; ++k, ++next) {
      const double v = 50.0 + 0.5 * ((next * 7919) % 17 - 8) / 8.0;
      payloads.push_back(std::string("{\"t\":")
                             .append(std::to_string(1'780'000'000 + next))
                             .append(",\"value\":")
                             .append(std::to_string(v))
                             .append("}"));
    }
  };
  std::uint64_t target = 0;
  for (auto _ : state) {
    state.PauseTiming();
    make_batch();
    state.ResumeTiming();
    for (const std::string& payload : payloads) {
      for (const std::string& topic : topics) bus.Deliver(topic, payload);
    }
    target += kBatch;
    while ((*runtime)->counters().samples + (*runtime)->counters().dropped < target) {
      std::this_thread::yield();
    }
  }
  state.SetItemsProcessed(static_cast<std::int64_t>(target));
  state.counters["dropped"] = static_cast<double>((*runtime)->counters().dropped);
  state.counters["workers"] = workers;
  (*runtime)->Stop();
}
BENCHMARK(BM_RuntimeIntake)->Arg(1)->Arg(2)->UseRealTime()->Unit(benchmark::kMillisecond);

}  // namespace
}  // namespace nightjar::service
