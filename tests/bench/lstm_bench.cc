// Throughput of the LSTM predictor on one core, and this core's FP32 FMA peak.
//
// BM_LstmTrain/H: one LstmPredictor::Observe with learn = true (W = 32, S = 1: one
//   truncated-BPTT window of 32 steps, gradient clipping and an Adam step per sample).
// BM_LstmInfer/H: one Observe with learn = false (one cell step and the head).
// items_per_second is samples per second. GFLOP/s counts the floating-point work
// per sample analytically (formulas at TrainFlops / InferFlops).
// BM_Fp32FmaPeak: independent chains of packet FMAs, the ceiling for the above.

#include <benchmark/benchmark.h>

#include <Eigen/Core>
#include <array>
#include <cmath>
#include <vector>

#include "core/lstm_predictor.h"

namespace nightjar::core {
namespace {

constexpr int kInputSize = 3;
constexpr int kWindow = 32;

// FLOPs of one cell step, I inputs, H hidden units: the stacked product
// [W_input|W_hidden] (4H x (I+H)) times [x; h] is 2*4H*(I+H), plus 4H for the bias;
// the activations cost 3 per gate element (scale, tanh counted as 1, scale-and-offset),
// 12H; the cell update c' = f*c + i*g is 3H, h' = o*tanh(c') is 2H.
double CellFlops(double i, double h) { return 8.0 * h * (i + h) + 4.0 * h + 12.0 * h + 5.0 * h; }

// One inference sample: a cell step and the head (2H).
double InferFlops(double i, double h) { return CellFlops(i, h) + 2.0 * h; }

// One training sample with window T: T forward cell steps; head and loss over the
// window 2HT + 4T; backward per step: dh += dy*w_head 2H, gate and cell derivatives
// 21H, and W_hidden^T dG, 2*4H*H; weight gradient dG [X; H_prev]^T, 2*4H*(I+H)*T;
// bias gradient 4H*T; head gradient 2HT; clipping 2P + P; Adam 11 per parameter
// (m: 3, v: 4, update: 4 + sqrt) with P = 4H(I+H+1) + H + 1 parameters; then the
// inference step of the new sample.
double TrainFlops(double i, double h, double t) {
  const double p = 4.0 * h * (i + h + 1.0) + h + 1.0;
  const double forward = t * CellFlops(i, h) + 2.0 * h * t + 4.0 * t;
  const double backward =
      t * (2.0 * h + 21.0 * h + 8.0 * h * h) + 8.0 * h * (i + h) * t + 4.0 * h * t + 2.0 * h * t;
  return forward + backward + 3.0 * p + 11.0 * p + InferFlops(i, h);
}

// A noisy sine with time-of-day features, cycled through by the benchmarks.
std::vector<std::array<float, kInputSize>> MakeSamples() {
  std::vector<std::array<float, kInputSize>> samples(4096);
  std::uint64_t s = 12345;
  for (std::size_t k = 0; k < samples.size(); ++k) {
    s = s * 6364136223846793005ULL + 1442695040888963407ULL;
    const double noise = (static_cast<double>(s >> 11) * 0x1.0p-53 - 0.5) * 0.1;
    const double phase = 2.0 * 3.14159265358979323846 * static_cast<double>(k);
    samples[k] = {static_cast<float>(std::sin(phase / 50.0) + noise),
                  static_cast<float>(std::sin(phase / 4096.0)),
                  static_cast<float>(std::cos(phase / 4096.0))};
  }
  return samples;
}

void RunPredictor(benchmark::State& state, bool learn) {
  LstmPredictorOptions options;
  options.input_size = kInputSize;
  options.hidden_size = static_cast<int>(state.range(0));
  options.window = kWindow;
  options.train_every = 1;
  LstmPredictor predictor(options);
  LstmWorkspace<float> ws = LstmPredictor::MakeWorkspace(options);
  const auto samples = MakeSamples();
  std::size_t k = 0;
  for (; k < std::size_t{2} * kWindow; ++k) predictor.Observe(samples[k].data(), true, ws);  // fill
  for (auto _ : state) {
    predictor.Observe(samples[k].data(), learn, ws);
    k = (k + 1) & (samples.size() - 1);
    benchmark::DoNotOptimize(predictor.prediction());
  }
  state.SetItemsProcessed(state.iterations());
  const auto h = static_cast<double>(options.hidden_size);
  const double flops = learn ? TrainFlops(kInputSize, h, kWindow) : InferFlops(kInputSize, h);
  state.counters["GFLOP/s"] =
      benchmark::Counter(flops * 1e-9, benchmark::Counter::kIsIterationInvariantRate);
  state.counters["FLOP/sample"] = flops;
}

// Google Benchmark names benchmarks BM_*.
void BM_LstmTrain(benchmark::State& state) {  // NOLINT(readability-identifier-naming)
  RunPredictor(state, true);
}
void BM_LstmInfer(benchmark::State& state) {  // NOLINT(readability-identifier-naming)
  RunPredictor(state, false);
}
BENCHMARK(BM_LstmTrain)->Arg(16)->Arg(32)->Arg(64);
BENCHMARK(BM_LstmInfer)->Arg(16)->Arg(32)->Arg(64);

// kChains independent accumulators of the widest packet Eigen uses here (16 floats
// with AVX-512, 8 with AVX2): enough chains to cover FMA latency x issue width on
// current x86 cores (4 cycles x 2 units = 8), so the loop is throughput-bound.
void BM_Fp32FmaPeak(benchmark::State& state) {  // NOLINT(readability-identifier-naming)
  using Packet = Eigen::internal::packet_traits<float>::type;
  constexpr int kLanes = Eigen::internal::packet_traits<float>::size;
  constexpr int kChains = 16;
  constexpr int kRepeats = 256;
  const Packet a = Eigen::internal::pset1<Packet>(0.999999f);
  const Packet b = Eigen::internal::pset1<Packet>(1e-6f);
  // NOLINTNEXTLINE(modernize-avoid-c-arrays): std::array drops vector attributes
  Packet acc[kChains];
  for (int c = 0; c < kChains; ++c) acc[c] = Eigen::internal::pset1<Packet>(static_cast<float>(c));
  for (auto _ : state) {
    for (int r = 0; r < kRepeats; ++r) {
      for (Packet& x : acc) x = Eigen::internal::pmadd(x, a, b);
    }
    benchmark::ClobberMemory();
  }
  Packet sum = acc[0];
  for (int c = 1; c < kChains; ++c) sum = Eigen::internal::padd(sum, acc[c]);
  benchmark::DoNotOptimize(sum);
  const double flops = 2.0 * kLanes * kChains * kRepeats;
  state.counters["GFLOP/s"] =
      benchmark::Counter(flops * 1e-9, benchmark::Counter::kIsIterationInvariantRate);
  state.counters["lanes"] = kLanes;
}
BENCHMARK(BM_Fp32FmaPeak);

}  // namespace
}  // namespace nightjar::core
