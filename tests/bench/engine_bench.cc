// Throughput of the whole engine step, Engine::Process: health checks, input scaling,
// the LSTM forecast (and training), the residual charts and the alarms.
//
// Every benchmark feeds armed channels (learning is over before timing starts) a 1 Hz
// in-control signal shaped like the Brackwater Mill CW2 cooling-water skid's pump flow:
// a plant load cycle plus measurement noise. items_per_second is samples per second.
//
// BM_EngineTrain/H: one channel, hidden size H, W = 32, S = 1: every sample also runs a
//   truncated-BPTT window of 32 steps and an Adam step.
// BM_EngineInfer/H: the same channel with training off (see InferenceOnly).
//   Both report bytes/channel (ChannelPipeline::MemoryBytes) and GFLOP/s of the LSTM
//   work alone (same analytic count as lstm_bench.cc, with the engine's 4 inputs).
// BM_EngineManyChannels/N: N channels (H = 32, inference), samples round-robin, so a
//   channel's state comes from L2, L3 or DRAM rather than L1.
// BM_EngineAssetContext/N/T: the cost of context inputs (ContextOptions): N channels of
//   one asset with and without them, training (T = 1) or not, as a ratio.
// BM_EngineWorkers/{train,infer}/H/C: one Engine per thread, C channels each, as the
//   daemon's workers run; one worker, then two, alternating in the same run. Reports
//   total samples/s of each and their ratio (two cores should give close to 2), by wall
//   time (ratio) and by each thread's CPU time (cpu_ratio: what the workers would give
//   with a core each; the one to read when other work shares the cores, see load1).

#include <benchmark/benchmark.h>

#include <algorithm>
#include <atomic>
#include <chrono>
#include <cmath>
#include <cstddef>
#include <cstdint>
#include <cstdlib>
#include <ctime>
#include <latch>
#include <limits>
#include <memory>
#include <numbers>
#include <random>
#include <string>
#include <thread>
#include <vector>

#if defined(__GLIBC__)
#include <malloc.h>
#endif

#include "core/engine.h"

namespace nightjar::core {
namespace {

constexpr int kWindow = 32;
constexpr int kEngineInputs = 4;  // increment, level, sin and cos of the time of day
// 2024-03-04T00:00:00Z: an arbitrary start; only differences matter.
constexpr TimestampUs kStart = 1'709'510'400 * kMicrosPerSecond;

// The signal is precomputed and cycled; its periods divide the length, so wrapping
// around is seamless.
constexpr std::size_t kSignalLength = std::size_t{1} << 16;

// cw2.pump_a.flow in m3/h at 1 Hz: 180 m3/h mean, a 4096 s plant load cycle of
// +-25 m3/h, a 512 s recirculation swing of +-6 m3/h, and white noise of 1.5 m3/h sd.
const std::vector<double>& FlowSignal() {
  static const std::vector<double> signal = [] {
    std::vector<double> v(kSignalLength);
    std::mt19937_64 rng(20240304);
    std::normal_distribution<double> noise(0.0, 1.5);
    for (std::size_t k = 0; k < v.size(); ++k) {
      const auto t = static_cast<double>(k);
      v[k] = 180.0 + 25.0 * std::sin(2.0 * std::numbers::pi * t / 4096.0) +
             6.0 * std::sin(2.0 * std::numbers::pi * t / 512.0 + 1.0) + noise(rng);
    }
    return v;
  }();
  return signal;
}

// The engine has no switch that stops a channel training: a channel takes an Adam step
// every predictor.train_every learnable samples, fixed when it is created. The largest
// S means the step never comes within a benchmark; the training ring is still filled,
// as between steps in normal running.
void InferenceOnly(ChannelOptions& options) {
  options.predictor.train_every = std::numeric_limits<int>::max();
}

// Defaults (30 min of learning before arming) apart from the model size and S.
ChannelOptions BenchOptions(int hidden, bool train) {
  ChannelOptions options;
  options.unit = "m3/h";
  options.predictor.hidden_size = hidden;
  options.predictor.window = kWindow;
  options.predictor.train_every = 1;
  if (!train) InferenceOnly(options);
  return options;
}

// Channels of one engine fed round-robin: every channel gets one sample per second of
// sample time, spread evenly over the second. Cache-line aligned so that two workers'
// fleets never share a line.
class alignas(64) Fleet {
 public:
  // one_asset: every channel is a tag of one asset (cw2.skid.tag_J), so with the default
  // ContextOptions each model takes the others as inputs; otherwise each is its own pump.
  Fleet(std::size_t channels, const ChannelOptions& options, bool one_asset = false)
      : engine_(std::make_unique<Engine>(EngineOptions{.defaults = options, .seed = 7})),
        signal_(FlowSignal()) {
    ids_.reserve(channels);
    for (std::size_t j = 0; j < channels; ++j) {
      const std::string name = one_asset ? "cw2.skid.tag_" + std::to_string(j)
                                         : "cw2.pump_" + std::to_string(j) + ".flow";
      Result<ChannelId> id = engine_->AddChannel(name);
      if (id.ok()) ids_.push_back(*id);
    }
    spacing_ = kMicrosPerSecond / static_cast<TimestampUs>(std::max<std::size_t>(channels, 1));
    out_.reserve(64);
  }

  std::size_t size() const { return ids_.size(); }
  // Alarm raises per channel and day of samples since arming; clean data should stay
  // near the false-alarm budget (ThresholdOptions::false_alarms_per_day, default 0.5).
  double RaisesPerChannelDay() const {
    return samples_ == 0
               ? 0.0
               : static_cast<double>(raises_) * kSecondsPerDay / static_cast<double>(samples_);
  }

  // Feeds every channel until learning is over; true if all are armed.
  bool Arm(int warmup_samples) {
    // A few extra rounds: the first sample gives no increment and arming waits for
    // the sample-period estimate.
    for (int r = 0; r < warmup_samples + 16; ++r) {
      for (std::size_t j = 0; j < ids_.size(); ++j) Step();
    }
    raises_ = 0;
    samples_ = 0;
    return std::all_of(ids_.begin(), ids_.end(), [this](ChannelId id) {
      return engine_->channel_status(id).state == ChannelState::kArmed;
    });
  }

  // The next sample round-robin. Each channel reads the signal at its own phase.
  void Step() {
    const std::size_t j = next_;
    const TimestampUs time =
        kStart + round_ * kMicrosPerSecond + static_cast<TimestampUs>(j) * spacing_;
    const std::size_t k =
        (static_cast<std::size_t>(round_) + j * 7919) & (kSignalLength - 1);  // 7919: prime
    engine_->Process(ids_[j], time, signal_[k], out_);
    ++samples_;
    if (!out_.empty()) {
      for (const Alert& alert : out_) raises_ += alert.phase == AlertPhase::kRaise ? 1 : 0;
      out_.clear();
    }
    if (++next_ == ids_.size()) {
      next_ = 0;
      ++round_;
    }
  }

  std::size_t MemoryBytes() const {
    std::size_t bytes = 0;
    for (ChannelId id : ids_) bytes += engine_->channel(id).MemoryBytes();
    return bytes;
  }

 private:
  std::unique_ptr<Engine> engine_;
  const std::vector<double>& signal_;
  std::vector<ChannelId> ids_;
  std::vector<Alert> out_;
  TimestampUs spacing_ = 0;
  std::int64_t round_ = 0;
  std::size_t next_ = 0;
  std::int64_t samples_ = 0;
  std::int64_t raises_ = 0;
};

// A fleet of `channels` channels, armed; null if a channel failed to arm.
std::unique_ptr<Fleet> MakeArmedFleet(std::size_t channels, const ChannelOptions& options,
                                      bool one_asset = false) {
  auto fleet = std::make_unique<Fleet>(channels, options, one_asset);
  if (fleet->size() != channels || !fleet->Arm(options.warmup_samples)) return nullptr;
  return fleet;
}

// Heap bytes in use by the process, from the allocator's own books (0 if unknown).
std::size_t HeapInUse() {
#if defined(__GLIBC__)
  return mallinfo2().uordblks;
#else
  return 0;
#endif
}

// FLOPs of one cell step, I inputs, H hidden units (derivation in lstm_bench.cc).
double CellFlops(double i, double h) { return 8.0 * h * (i + h) + 4.0 * h + 12.0 * h + 5.0 * h; }
double InferFlops(double i, double h) { return CellFlops(i, h) + 2.0 * h; }
double TrainFlops(double i, double h, double t) {
  const double p = 4.0 * h * (i + h + 1.0) + h + 1.0;
  const double forward = t * CellFlops(i, h) + 2.0 * h * t + 4.0 * t;
  const double backward =
      t * (2.0 * h + 21.0 * h + 8.0 * h * h) + 8.0 * h * (i + h) * t + 4.0 * h * t + 2.0 * h * t;
  return forward + backward + 3.0 * p + 11.0 * p + InferFlops(i, h);
}

void RunOneChannel(benchmark::State& state, bool train) {
  const int hidden = static_cast<int>(state.range(0));
  const std::unique_ptr<Fleet> fleet = MakeArmedFleet(1, BenchOptions(hidden, train));
  if (!fleet) {
    state.SkipWithError("channel did not arm");
    return;
  }
  for (auto _ : state) fleet->Step();
  state.SetItemsProcessed(state.iterations());
  const auto h = static_cast<double>(hidden);
  const double flops = train ? TrainFlops(kEngineInputs, h, kWindow) : InferFlops(kEngineInputs, h);
  state.counters["GFLOP/s"] =
      benchmark::Counter(flops * 1e-9, benchmark::Counter::kIsIterationInvariantRate);
  state.counters["bytes/channel"] = static_cast<double>(fleet->MemoryBytes());
  state.counters["raises/channel/day"] = fleet->RaisesPerChannelDay();
}

// Google Benchmark names benchmarks BM_*.
void BM_EngineTrain(benchmark::State& state) {  // NOLINT(readability-identifier-naming)
  RunOneChannel(state, true);
}
void BM_EngineInfer(benchmark::State& state) {  // NOLINT(readability-identifier-naming)
  RunOneChannel(state, false);
}
BENCHMARK(BM_EngineTrain)->Arg(16)->Arg(32)->Arg(64);
BENCHMARK(BM_EngineInfer)->Arg(16)->Arg(32)->Arg(64);

void BM_EngineManyChannels(benchmark::State& state) {  // NOLINT(readability-identifier-naming)
  const auto channels = static_cast<std::size_t>(state.range(0));
  // Arming 10 000 channels takes tens of seconds and Google Benchmark calls this
  // function several times while it sizes the run, so the fleet is kept between calls
  // (its samples carry on where the last call stopped). Bench-only state.
  static std::unique_ptr<Fleet> fleet;
  static double heap_per_channel = 0.0;
  if (!fleet || fleet->size() != channels) {
    fleet.reset();
    const std::size_t heap_before = HeapInUse();
    fleet = MakeArmedFleet(channels, BenchOptions(32, false));
    if (!fleet) {
      state.SkipWithError("channels did not arm");
      return;
    }
    heap_per_channel = (static_cast<double>(HeapInUse()) - static_cast<double>(heap_before)) /
                       static_cast<double>(channels);
  }
  for (auto _ : state) fleet->Step();
  state.SetItemsProcessed(state.iterations());
  state.counters["bytes/channel"] =
      static_cast<double>(fleet->MemoryBytes()) / static_cast<double>(channels);
  // Everything the fleet took from the heap: MemoryBytes plus the engine's name map, the
  // channel's own small vectors and the shared workspace.
  state.counters["heap/channel"] = heap_per_channel;
  state.counters["raises/channel/day"] = fleet->RaisesPerChannelDay();
}
BENCHMARK(BM_EngineManyChannels)->Arg(100)->Arg(10000);

// The cost of context inputs: N channels of one asset, each model taking the other N - 1
// as inputs (ContextOptions defaults), against the same N channels with
// context.from_asset off, stepped alternately in the same run. context_cost is the ratio
// of time per sample, with context over without (1 = free).
void BM_EngineAssetContext(benchmark::State& state) {  // NOLINT(readability-identifier-naming)
  const auto channels = static_cast<std::size_t>(state.range(0));
  const bool train = state.range(1) != 0;
  ChannelOptions with = BenchOptions(32, train);
  ChannelOptions without = with;
  without.context.from_asset = false;
  const std::unique_ptr<Fleet> a = MakeArmedFleet(channels, with, true);
  const std::unique_ptr<Fleet> b = MakeArmedFleet(channels, without, true);
  if (!a || !b) {
    state.SkipWithError("channels did not arm");
    return;
  }
  using Clock = std::chrono::steady_clock;
  Clock::duration with_time{};
  Clock::duration without_time{};
  for (auto _ : state) {
    const Clock::time_point begin = Clock::now();
    for (std::size_t j = 0; j < channels; ++j) a->Step();
    const Clock::time_point middle = Clock::now();
    for (std::size_t j = 0; j < channels; ++j) b->Step();
    with_time += middle - begin;
    without_time += Clock::now() - middle;
  }
  state.SetItemsProcessed(state.iterations() * static_cast<std::int64_t>(2 * channels));
  state.counters["context_cost"] = std::chrono::duration<double>(with_time).count() /
                                   std::chrono::duration<double>(without_time).count();
  state.counters["bytes/channel"] =
      static_cast<double>(a->MemoryBytes()) / static_cast<double>(channels);
  state.counters["bytes/channel_without"] =
      static_cast<double>(b->MemoryBytes()) / static_cast<double>(channels);
}
// Args: channels in the asset, training (1) or inference (0).
BENCHMARK(BM_EngineAssetContext)->Args({8, 1})->Args({8, 0})->Args({52, 1})->Args({52, 0});

// Samples per second of a set of workers, summed over workers: by wall time, and by
// each thread's own CPU time. The second is what the workers would give with a core each
// to themselves; on cores shared with other work only it is meaningful.
struct WorkerRate {
  double wall = 0.0;
  double cpu = 0.0;
};

double ThreadCpuSeconds() {
  timespec now{};
  clock_gettime(CLOCK_THREAD_CPUTIME_ID, &now);
  return static_cast<double>(now.tv_sec) + static_cast<double>(now.tv_nsec) * 1e-9;
}

// Runs each fleet on its own thread for `seconds` of wall time. Each thread times itself
// between one shared start and a stop flag, so thread start-up is outside the measurement.
WorkerRate RunWorkers(const std::vector<Fleet*>& fleets, double seconds) {
  struct WorkerRun {
    std::int64_t samples = 0;
    double wall_s = 0.0;
    double cpu_s = 0.0;
  };
  std::vector<WorkerRun> runs(fleets.size());
  std::atomic<bool> stop{false};
  std::latch start(static_cast<std::ptrdiff_t>(fleets.size()) + 1);
  std::vector<std::thread> threads;
  threads.reserve(fleets.size());
  for (std::size_t i = 0; i < fleets.size(); ++i) {
    threads.emplace_back([&, i] {
      Fleet& fleet = *fleets[i];
      start.arrive_and_wait();
      const auto wall_begin = std::chrono::steady_clock::now();
      const double cpu_begin = ThreadCpuSeconds();
      std::int64_t samples = 0;
      while (!stop.load(std::memory_order_relaxed)) {
        for (int k = 0; k < 16; ++k) fleet.Step();
        samples += 16;
      }
      const std::chrono::duration<double> wall = std::chrono::steady_clock::now() - wall_begin;
      runs[i] = {samples, wall.count(), ThreadCpuSeconds() - cpu_begin};
    });
  }
  start.arrive_and_wait();
  std::this_thread::sleep_for(std::chrono::duration<double>(seconds));
  stop.store(true, std::memory_order_relaxed);
  for (std::thread& t : threads) t.join();
  WorkerRate rate;
  for (const WorkerRun& r : runs) {
    rate.wall += static_cast<double>(r.samples) / r.wall_s;
    rate.cpu += static_cast<double>(r.samples) / r.cpu_s;
  }
  return rate;
}

// The cores are shared with other work, so each configuration runs kRounds times,
// alternating, and the best of each is kept: the least disturbed run is the closest to
// what the code can do.
constexpr int kRounds = 5;
constexpr double kRoundSeconds = 1.0;

void RunWorkersBench(benchmark::State& state, bool train) {
  const int hidden = static_cast<int>(state.range(0));
  const auto channels = static_cast<std::size_t>(state.range(1));
  // Each fleet is built and armed on a thread of its own, at the same time, as daemon
  // workers create their channels: the allocator then serves them from separate
  // arenas, so no cache line holds state of both.
  std::unique_ptr<Fleet> a;
  std::unique_ptr<Fleet> b;
  {
    std::thread build_a([&] { a = MakeArmedFleet(channels, BenchOptions(hidden, train)); });
    std::thread build_b([&] { b = MakeArmedFleet(channels, BenchOptions(hidden, train)); });
    build_a.join();
    build_b.join();
  }
  if (!a || !b) {
    state.SkipWithError("channels did not arm");
    return;
  }
  // Other work on the cores shows here (1-minute load average before the rounds).
  double load[1] = {0.0};  // NOLINT(modernize-avoid-c-arrays): getloadavg's interface
  if (getloadavg(load, 1) == 1) state.counters["load1"] = load[0];
  WorkerRate one;
  WorkerRate two;
  for (auto _ : state) {
    for (int r = 0; r < kRounds; ++r) {
      const WorkerRate one_now = RunWorkers({a.get()}, kRoundSeconds);
      const WorkerRate two_now = RunWorkers({a.get(), b.get()}, kRoundSeconds);
      one = {std::max(one.wall, one_now.wall), std::max(one.cpu, one_now.cpu)};
      two = {std::max(two.wall, two_now.wall), std::max(two.cpu, two_now.cpu)};
    }
  }
  state.counters["1w_samples/s"] = one.wall;
  state.counters["2w_samples/s"] = two.wall;
  state.counters["ratio"] = two.wall / one.wall;
  state.counters["1w_samples/cpu_s"] = one.cpu;
  state.counters["2w_samples/cpu_s"] = two.cpu;
  state.counters["cpu_ratio"] = two.cpu / one.cpu;
  state.counters["raises/channel/day"] =
      0.5 * (a->RaisesPerChannelDay() + b->RaisesPerChannelDay());
}

// NOLINTNEXTLINE(readability-identifier-naming)
void BM_EngineWorkers(benchmark::State& state, bool train) { RunWorkersBench(state, train); }
// Args: hidden size, channels per worker. At inference a channel touches ~20 KB per
// sample (H = 32), so 16 channels stay in a core's L2, 250 share the L3 and 1000 per
// worker outgrow it once two workers run.
BENCHMARK_CAPTURE(BM_EngineWorkers, train, true)
    ->Args({32, 16})
    ->Iterations(1)
    ->Unit(benchmark::kSecond);
BENCHMARK_CAPTURE(BM_EngineWorkers, infer, false)
    ->Args({32, 16})
    ->Args({32, 250})
    ->Args({32, 1000})
    ->Iterations(1)
    ->Unit(benchmark::kSecond);

}  // namespace
}  // namespace nightjar::core
