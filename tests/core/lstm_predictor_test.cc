#include "core/lstm_predictor.h"

#include <gtest/gtest.h>

#include <algorithm>
#include <array>
#include <cmath>
#include <cstdint>
#include <limits>
#include <vector>

#include "support/allocation_counter.h"

namespace nightjar::core {
namespace {

// Allocation checks: with set_is_malloc_allowed(false) Eigen aborts on any heap
// allocation, but only where eigen_assert is live (builds without NDEBUG, e.g. the
// sanitizer job); AllocationCounter sees operator new in every build, not Eigen's malloc.

using Eigen::Index;

constexpr double kPi = 3.14159265358979323846;

// Deterministic N(0, 1) draws: a 64-bit LCG (Knuth's MMIX constants) feeding
// Box-Muller (common practice; no <random> distributions, whose output differs
// between standard libraries).
class Gaussian {
 public:
  explicit Gaussian(std::uint64_t seed) : state_(seed) {}
  double Next() {
    const double u1 = (static_cast<double>(NextBits()) + 1.0) * 0x1.0p-53;  // (0, 1]
    const double u2 = static_cast<double>(NextBits()) * 0x1.0p-53;
    return std::sqrt(-2.0 * std::log(u1)) * std::cos(2.0 * kPi * u2);
  }

 private:
  std::uint64_t NextBits() {
    state_ = state_ * 6364136223846793005ULL + 1442695040888963407ULL;
    return state_ >> 11;
  }
  std::uint64_t state_;
};

// Features of sample k: a noisy sine of period 50 samples and time-of-day sin/cos
// for a "day" of 1440 samples (unrelated to the sine, as exogenous inputs often are).
std::array<float, 3> NoisySine(int k, double noise) {
  const double day = 2.0 * kPi * static_cast<double>(k) / 1440.0;
  return {static_cast<float>(std::sin(2.0 * kPi * static_cast<double>(k) / 50.0) + noise),
          static_cast<float>(std::sin(day)), static_cast<float>(std::cos(day))};
}

// The common-sense baseline every forecaster must beat is "next = last" (common
// practice). Noisy sine, period 50, noise sd 0.05, 20 000 samples, default options
// (H = 32, W = 32, S = 1), learning throughout; errors measured over the last 5 000.
// Expect the model's one-step MAE <= 0.7x the naive MAE (here it reaches ~0.5x), and
// not below 0.9x the noise floor sd * sqrt(2 / pi) = 0.0399 (mean |N(0, sd^2)|, a
// standard identity, from memory): no forecast can predict the noise itself.
TEST(LstmPredictorTest, BeatsNaiveForecastOnNoisySine) {
  const LstmPredictorOptions options;
  LstmPredictor predictor(options);
  LstmWorkspace<float> ws = LstmPredictor::MakeWorkspace(options);
  Gaussian gaussian(2024);
  const int samples = 20000, scored_from = 15000;
  const double sd = 0.05;
  double model_error = 0.0, naive_error = 0.0, previous = 0.0;
  for (int k = 0; k < samples; ++k) {
    const std::array<float, 3> features = NoisySine(k, sd * gaussian.Next());
    const auto value = static_cast<double>(features[0]);
    if (k >= scored_from) {
      model_error += std::abs(value - static_cast<double>(predictor.prediction()));
      naive_error += std::abs(value - previous);
    }
    predictor.Observe(features.data(), /*learn=*/true, ws);
    previous = value;
  }
  const double scored = samples - scored_from;
  const double model_mae = model_error / scored, naive_mae = naive_error / scored;
  EXPECT_LE(model_mae, 0.7 * naive_mae) << "model " << model_mae << " naive " << naive_mae;
  EXPECT_GE(model_mae, 0.9 * sd * std::sqrt(2.0 / kPi));
  EXPECT_EQ(predictor.train_steps(), samples - 1);
  EXPECT_LT(predictor.current_learning_rate(), 1.01 * options.final_learning_rate);
}

// The ring bookkeeping against a plain re-implementation of the documented rules that
// keeps every sample in a growing vector and calls LstmNetwork / AdamOptimizer
// directly: same operations in the same order, so predictions must be bit-identical.
// Covers the ring wrapping (W = 5), train_every = 2, !learn runs, a non-finite sample
// and ResetSequence. H = 16 takes the vectorised float kernels.
TEST(LstmPredictorTest, TrainingFollowsDocumentedWindowRules) {
  LstmPredictorOptions options;
  options.input_size = 2;
  options.hidden_size = 16;
  options.window = 5;
  options.train_every = 2;
  options.learning_rate = 1e-2;
  options.final_learning_rate = 1e-3;
  options.learning_rate_decay_steps = 10.0;
  options.gradient_clip_norm = 0.5;
  options.seed = 77;
  LstmPredictor predictor(options);
  LstmWorkspace<float> ws = LstmPredictor::MakeWorkspace(options);

  // The reference.
  const Index in = 2, hs = 16, window = 5;
  LstmNetwork<float> net(in, hs);
  net.InitializeUniform(options.seed, 1.0f);
  AdamOptimizer<float> adam(net.parameter_count());
  LstmWorkspace<float> ref_ws(in, hs, window);
  struct Entry {
    Eigen::VectorXf x, h, c;
    float target = 0.0f;
  };
  std::vector<Entry> history;
  Eigen::VectorXf h = Eigen::VectorXf::Zero(hs), c = Eigen::VectorXf::Zero(hs);
  Index pairs = 0;
  int since_train = 0;
  bool last_learnable = false;
  float prediction = 0.0f;
  std::int64_t steps_taken = 0;
  auto reference_observe = [&](const Eigen::VectorXf& x, bool learn) {
    if (!x.allFinite()) {
      pairs = 0;
      since_train = 0;
      last_learnable = false;
      return;
    }
    if (learn && last_learnable) {
      history.back().target = x[0];
      pairs = std::min<Index>(pairs + 1, window);
      if (++since_train >= 2) {
        since_train = 0;
        const Index first = static_cast<Index>(history.size()) - pairs;
        Eigen::MatrixXf inputs(in, pairs);
        Eigen::VectorXf targets(pairs);
        for (Index k = 0; k < pairs; ++k) {
          inputs.col(k) = history[static_cast<std::size_t>(first + k)].x;
          targets[k] = history[static_cast<std::size_t>(first + k)].target;
        }
        const Entry& start = history[static_cast<std::size_t>(first)];
        Eigen::VectorXf gradient(net.parameter_count());
        net.LossAndGradient(inputs, targets, start.h, start.c, ref_ws, gradient);
        ClipGradientNorm(gradient, 0.5f);
        adam.set_learning_rate(1e-3 +
                               (1e-2 - 1e-3) * std::exp(-static_cast<double>(steps_taken) / 10.0));
        adam.Step(net.parameters(), gradient);
        ++steps_taken;
      }
    } else if (!learn) {
      pairs = 0;
      since_train = 0;
    }
    // The predictor stores window-start states as bfloat16 (documented); so does this.
    history.push_back({x, h.unaryExpr(&LstmPredictor::RoundStoredState),
                       c.unaryExpr(&LstmPredictor::RoundStoredState), 0.0f});
    last_learnable = learn;
    net.Step(x, h, c, ref_ws);
    prediction = net.Output(h);
  };

  for (int k = 0; k < 60; ++k) {
    Eigen::VectorXf x(2);
    x << static_cast<float>(std::sin(0.4 * k)), static_cast<float>(k % 7) / 7.0f;
    const bool learn = !(k >= 20 && k < 24) && k != 31;  // a !learn run and a single one
    if (k == 40) x[1] = std::numeric_limits<float>::quiet_NaN();
    if (k == 50) {
      predictor.ResetSequence();
      h.setZero();
      c.setZero();
      pairs = 0;
      since_train = 0;
      last_learnable = false;
      prediction = 0.0f;
    }
    predictor.Observe(x.data(), learn, ws);
    reference_observe(x, learn);
    ASSERT_EQ(predictor.prediction(), prediction) << "sample " << k;
    ASSERT_EQ(predictor.train_steps(), steps_taken) << "sample " << k;
  }
  EXPECT_EQ(predictor.network().parameters(), net.parameters());
  EXPECT_GT(steps_taken, 15);
}

TEST(LstmPredictorTest, SameInputsGiveBitIdenticalPredictions) {
  LstmPredictorOptions options;
  LstmPredictor a(options), b(options);
  options.seed = 2;
  LstmPredictor c(options);
  LstmWorkspace<float> ws = LstmPredictor::MakeWorkspace(options);
  Gaussian gaussian(5);
  bool differs_from_other_seed = false;
  for (int k = 0; k < 1000; ++k) {
    const std::array<float, 3> features = NoisySine(k, 0.05 * gaussian.Next());
    const bool learn = k % 250 < 220;
    a.Observe(features.data(), learn, ws);
    b.Observe(features.data(), learn, ws);  // the shared workspace must not leak state
    c.Observe(features.data(), learn, ws);
    ASSERT_EQ(a.prediction(), b.prediction()) << "sample " << k;
    differs_from_other_seed |= a.prediction() != c.prediction();
  }
  EXPECT_EQ(a.network().parameters(), b.network().parameters());
  EXPECT_TRUE(differs_from_other_seed);
}

// Budget: <= 64 KiB per channel at H = 32, I = 3, W = 32 (the defaults). Parameters
// P = 4H(I+H+1) + H + 1 = 4641 floats, times 3 (weights, Adam m and v), plus the ring
// (I + 1) x W floats, h, c and the decoded window-start state (4H floats), and the
// stored states 2H x W in bfloat16: 4 * (13923 + 128 + 128) + 2 * 2048 = 60 812 bytes.
TEST(LstmPredictorTest, MemoryFitsBudgetAtDefaultSize) {
  const LstmPredictorOptions options;
  ASSERT_EQ(options.hidden_size, 32);
  ASSERT_EQ(options.input_size, 3);
  ASSERT_EQ(options.window, 32);
  const LstmPredictor predictor(options);
  EXPECT_EQ(predictor.MemoryBytes(), 60812u);
  EXPECT_LE(predictor.MemoryBytes(), 65536u);
  EXPECT_LE(predictor.MemoryBytes() + sizeof(LstmPredictor), 65536u);
}

TEST(LstmPredictorTest, ObserveDoesNotAllocate) {
  const LstmPredictorOptions options;
  LstmPredictor predictor(options);
  LstmWorkspace<float> ws = LstmPredictor::MakeWorkspace(options);
  for (int k = 0; k < 40; ++k) predictor.Observe(NoisySine(k, 0.0).data(), true, ws);
  std::size_t allocations = 0;
  {
    nightjar::testing::AllocationCounter counter;
    Eigen::internal::set_is_malloc_allowed(false);  // see "Allocation checks" above
    for (int k = 40; k < 140; ++k) {
      std::array<float, 3> features = NoisySine(k, 0.0);
      if (k == 90) features[0] = std::numeric_limits<float>::infinity();
      if (k == 100) predictor.ResetSequence();
      predictor.Observe(features.data(), k % 30 < 25, ws);
    }
    Eigen::internal::set_is_malloc_allowed(true);
    allocations = counter.count();
  }
  EXPECT_EQ(allocations, 0u);
  EXPECT_GT(predictor.train_steps(), 50);
}

// Other sizes, both code paths (H a multiple of the packet size or not) and the largest
// hidden_size * window that Validate accepts, where Eigen's product buffers are largest.
TEST(LstmPredictorTest, ObserveDoesNotAllocateAtOtherSizes) {
  struct Size {
    int input, hidden, window;
  };
  for (const Size size : {Size{1, 7, 3}, Size{5, 20, 64}, Size{2, 100, 80}, Size{3, 128, 64}}) {
    LstmPredictorOptions options;
    options.input_size = size.input;
    options.hidden_size = size.hidden;
    options.window = size.window;
    ASSERT_TRUE(LstmPredictor::Validate(options).ok());
    LstmPredictor predictor(options);
    LstmWorkspace<float> ws = LstmPredictor::MakeWorkspace(options);
    std::vector<float> features(static_cast<std::size_t>(size.input), 0.25f);
    const int warm_up = std::min(size.window + 1, 12);
    for (int k = 0; k < warm_up; ++k) {
      features[0] = static_cast<float>(std::sin(0.2 * k));
      predictor.Observe(features.data(), true, ws);
    }
    std::size_t allocations = 0;
    {
      nightjar::testing::AllocationCounter counter;
      Eigen::internal::set_is_malloc_allowed(false);
      for (int k = warm_up; k < warm_up + 3; ++k) {
        features[0] = static_cast<float>(std::sin(0.2 * k));
        predictor.Observe(features.data(), true, ws);
      }
      Eigen::internal::set_is_malloc_allowed(true);
      allocations = counter.count();
    }
    EXPECT_EQ(allocations, 0u) << "hidden " << size.hidden;
    EXPECT_TRUE(std::isfinite(predictor.prediction()));
  }
}

TEST(LstmPredictorTest, PredictionStartsAtZeroAndResetSequenceClearsState) {
  const LstmPredictorOptions options;
  LstmPredictor predictor(options);
  LstmWorkspace<float> ws = LstmPredictor::MakeWorkspace(options);
  EXPECT_EQ(predictor.prediction(), 0.0f);
  for (int k = 0; k < 10; ++k) predictor.Observe(NoisySine(k, 0.0).data(), true, ws);
  EXPECT_EQ(predictor.train_steps(), 9);  // the first sample has no predecessor
  EXPECT_NE(predictor.prediction(), 0.0f);

  predictor.ResetSequence();
  EXPECT_EQ(predictor.prediction(), 0.0f);
  const std::array<float, 3> x = NoisySine(10, 0.0);
  predictor.Observe(x.data(), true, ws);
  EXPECT_EQ(predictor.train_steps(), 9);  // no pair across the gap
  // The state restarted from zero: one cell step from h = c = 0 with the same weights.
  Eigen::VectorXf h = Eigen::VectorXf::Zero(32), c = Eigen::VectorXf::Zero(32);
  predictor.network().Step(Eigen::Map<const Eigen::VectorXf>(x.data(), 3), h, c, ws);
  EXPECT_EQ(predictor.prediction(), predictor.network().Output(h));
  predictor.Observe(NoisySine(11, 0.0).data(), true, ws);
  EXPECT_EQ(predictor.train_steps(), 10);
}

// learn = false (e.g. a closed-loop forecast while in alarm) never changes the weights,
// and restarts the history: the next learnable sample cannot pair with a !learn one.
TEST(LstmPredictorTest, NotLearningFreezesWeightsAndRestartsHistory) {
  const LstmPredictorOptions options;
  LstmPredictor predictor(options);
  LstmWorkspace<float> ws = LstmPredictor::MakeWorkspace(options);
  for (int k = 0; k < 5; ++k) predictor.Observe(NoisySine(k, 0.0).data(), true, ws);
  ASSERT_EQ(predictor.train_steps(), 4);
  const Eigen::VectorXf weights = predictor.network().parameters();
  for (int k = 5; k < 25; ++k) {  // closed loop: feed the model its own forecast
    std::array<float, 3> features = NoisySine(k, 0.0);
    features[0] = predictor.prediction();
    predictor.Observe(features.data(), false, ws);
  }
  EXPECT_EQ(predictor.network().parameters(), weights);
  predictor.Observe(NoisySine(25, 0.0).data(), true, ws);
  EXPECT_EQ(predictor.train_steps(), 4);
  predictor.Observe(NoisySine(26, 0.0).data(), true, ws);
  EXPECT_EQ(predictor.train_steps(), 5);
}

TEST(LstmPredictorTest, NonFiniteSampleIsIgnored) {
  const LstmPredictorOptions options;
  LstmPredictor predictor(options);
  LstmWorkspace<float> ws = LstmPredictor::MakeWorkspace(options);
  for (int k = 0; k < 5; ++k) predictor.Observe(NoisySine(k, 0.0).data(), true, ws);
  const float before = predictor.prediction();
  std::array<float, 3> bad = NoisySine(5, 0.0);
  bad[2] = std::numeric_limits<float>::quiet_NaN();
  predictor.Observe(bad.data(), true, ws);
  EXPECT_EQ(predictor.prediction(), before);
  EXPECT_EQ(predictor.train_steps(), 4);
  predictor.Observe(NoisySine(6, 0.0).data(), true, ws);  // history restarted: no pair
  EXPECT_EQ(predictor.train_steps(), 4);
  EXPECT_TRUE(std::isfinite(predictor.prediction()));
}

TEST(LstmPredictorTest, ValidateNamesTheBadField) {
  EXPECT_TRUE(LstmPredictor::Validate(LstmPredictorOptions{}).ok());
  auto field_of = [](void (*mutate)(LstmPredictorOptions&)) {
    LstmPredictorOptions options;
    mutate(options);
    const Status status = LstmPredictor::Validate(options);
    EXPECT_EQ(status.code(), StatusCode::kInvalidArgument);
    return status.message();
  };
  EXPECT_NE(field_of([](LstmPredictorOptions& o) { o.input_size = 0; }).find("input_size"),
            std::string::npos);
  EXPECT_NE(field_of([](LstmPredictorOptions& o) { o.hidden_size = 0; }).find("hidden_size"),
            std::string::npos);
  EXPECT_NE(field_of([](LstmPredictorOptions& o) { o.window = 0; }).find("window"),
            std::string::npos);
  EXPECT_NE(field_of([](LstmPredictorOptions& o) {
              o.hidden_size = 512;
              o.window = 64;
            }).find("hidden_size * lstm.window"),
            std::string::npos);
  EXPECT_NE(field_of([](LstmPredictorOptions& o) { o.train_every = 0; }).find("train_every"),
            std::string::npos);
  EXPECT_NE(field_of([](LstmPredictorOptions& o) { o.learning_rate = -1.0; }).find("learning_rate"),
            std::string::npos);
  EXPECT_NE(field_of([](LstmPredictorOptions& o) {
              o.final_learning_rate = 1.0;
            }).find("final_learning_rate"),
            std::string::npos);
  EXPECT_NE(field_of([](LstmPredictorOptions& o) {
              o.learning_rate_decay_steps = 0.0;
            }).find("learning_rate_decay_steps"),
            std::string::npos);
  EXPECT_NE(field_of([](LstmPredictorOptions& o) {
              o.gradient_clip_norm = std::numeric_limits<double>::infinity();
            }).find("gradient_clip_norm"),
            std::string::npos);
  LstmPredictorOptions bad;
  bad.window = -3;
  EXPECT_FALSE(LstmPredictor::Create(bad).ok());
  Result<LstmPredictor> good = LstmPredictor::Create(LstmPredictorOptions{});
  ASSERT_TRUE(good.ok());
  EXPECT_EQ(good->prediction(), 0.0f);
}

}  // namespace
}  // namespace nightjar::core
