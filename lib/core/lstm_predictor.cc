#include "core/lstm_predictor.h"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <cstring>
#include <string>

namespace nightjar::core {

using Eigen::Index;

namespace {

// bfloat16: the top 16 bits of an IEEE float, rounded to nearest even. States are finite.
std::uint16_t ToBfloat16(float value) {
  std::uint32_t bits = 0;
  std::memcpy(&bits, &value, sizeof bits);
  bits += 0x7FFFu + ((bits >> 16) & 1u);
  return static_cast<std::uint16_t>(bits >> 16);
}

float FromBfloat16(std::uint16_t stored) {
  const std::uint32_t bits = static_cast<std::uint32_t>(stored) << 16;
  float value = 0.0f;
  std::memcpy(&value, &bits, sizeof value);
  return value;
}

// Keeps the packing buffers of the weight-gradient product (about 16 * H * W bytes)
// within Eigen's 128 KiB stack-allocation limit, so training never touches the heap.
constexpr long kMaxHiddenTimesWindow = 8192;
}  // namespace

Status LstmPredictor::Validate(const LstmPredictorOptions& options) {
  if (options.input_size < 1 || options.input_size > 256) {
    return Status::InvalidArgument("lstm.input_size: must be in [1, 256], got " +
                                   std::to_string(options.input_size));
  }
  if (options.hidden_size < 1 || options.hidden_size > 1024) {
    return Status::InvalidArgument("lstm.hidden_size: must be in [1, 1024], got " +
                                   std::to_string(options.hidden_size));
  }
  if (options.window < 1 || options.window > 1024) {
    return Status::InvalidArgument("lstm.window: must be in [1, 1024], got " +
                                   std::to_string(options.window));
  }
  if (static_cast<long>(options.hidden_size) * options.window > kMaxHiddenTimesWindow) {
    return Status::InvalidArgument("lstm.hidden_size * lstm.window: must be <= " +
                                   std::to_string(kMaxHiddenTimesWindow));
  }
  if (options.train_every < 1) {
    return Status::InvalidArgument("lstm.train_every: must be >= 1, got " +
                                   std::to_string(options.train_every));
  }
  if (!(options.learning_rate > 0.0) || !std::isfinite(options.learning_rate)) {
    return Status::InvalidArgument("lstm.learning_rate: must be finite and > 0");
  }
  if (!(options.final_learning_rate > 0.0) ||
      !(options.final_learning_rate <= options.learning_rate)) {
    return Status::InvalidArgument(
        "lstm.final_learning_rate: must be > 0 and <= lstm.learning_rate");
  }
  if (!(options.learning_rate_decay_steps > 0.0) ||
      !std::isfinite(options.learning_rate_decay_steps)) {
    return Status::InvalidArgument("lstm.learning_rate_decay_steps: must be finite and > 0");
  }
  if (!std::isfinite(options.gradient_clip_norm)) {
    return Status::InvalidArgument("lstm.gradient_clip_norm: must be finite");
  }
  if (!std::isfinite(options.forget_bias)) {
    return Status::InvalidArgument("lstm.forget_bias: must be finite");
  }
  return Status::Ok();
}

Result<LstmPredictor> LstmPredictor::Create(const LstmPredictorOptions& options) {
  Status status = Validate(options);
  if (!status.ok()) return status;
  return LstmPredictor(options);
}

LstmPredictor::LstmPredictor(const LstmPredictorOptions& options)
    : options_(options),
      network_(options.input_size, options.hidden_size),
      adam_(LstmNetwork<float>::ParameterCount(options.input_size, options.hidden_size),
            AdamOptions{.learning_rate = options.learning_rate}) {
  assert(Validate(options).ok());
  network_.InitializeUniform(options.seed, static_cast<float>(options.forget_bias));
  const Index in = options.input_size, hs = options.hidden_size;
  ring_.setZero(in + 1, options.window);
  states_.setZero(2 * hs, options.window);
  start_h_.setZero(hs);
  start_c_.setZero(hs);
  h_.setZero(hs);
  c_.setZero(hs);
}

LstmWorkspace<float> LstmPredictor::MakeWorkspace(const LstmPredictorOptions& options) {
  return {options.input_size, options.hidden_size, options.window};
}

Index LstmPredictor::Slot(Index back) const {
  const Index w = ring_.cols();
  return (head_ - back + w) % w;
}

void LstmPredictor::Observe(const float* features, bool learn, LstmWorkspace<float>& ws) {
  const Index in = options_.input_size, hs = options_.hidden_size;
  if (!ws.Fits(in, hs, options_.window)) {
    // A caller bug; in release builds dropping the sample beats writing out of bounds.
    assert(false && "LstmPredictor::Observe: workspace too small");
    return;
  }
  const Eigen::Map<const Eigen::VectorXf> x(features, in);
  if (!x.allFinite()) {
    pairs_ = 0;
    since_train_ = 0;
    last_learnable_ = false;
    return;
  }
  if (learn && last_learnable_) {
    ring_(in, Slot(1)) = features[0];
    pairs_ = std::min<Index>(pairs_ + 1, ring_.cols());
    if (++since_train_ >= options_.train_every) {
      since_train_ = 0;
      Train(ws);
    }
  } else if (!learn) {
    pairs_ = 0;
    since_train_ = 0;
  }
  ring_.col(head_).head(in) = x;
  for (Index r = 0; r < hs; ++r) {
    states_(r, head_) = ToBfloat16(h_[r]);
    states_(hs + r, head_) = ToBfloat16(c_[r]);
  }
  head_ = (head_ + 1) % ring_.cols();
  last_learnable_ = learn;

  network_.Step(x, h_, c_, ws);
  prediction_ = network_.Output(h_);
}

void LstmPredictor::Train(LstmWorkspace<float>& ws) {
  const Index in = options_.input_size, hs = options_.hidden_size, steps = pairs_;
  // Unroll the ring into contiguous storage, oldest pair first.
  auto inputs = ws.staging_inputs(in, steps);
  auto targets = ws.staging_targets(steps);
  for (Index k = 0; k < steps; ++k) {
    const Index slot = Slot(steps - k);
    inputs.col(k) = ring_.col(slot).head(in);
    targets[k] = ring_(in, slot);
  }
  const Index first = Slot(steps);
  for (Index r = 0; r < hs; ++r) {
    start_h_[r] = FromBfloat16(states_(r, first));
    start_c_[r] = FromBfloat16(states_(hs + r, first));
  }
  auto gradient = ws.gradient(network_.parameter_count());
  const float loss = network_.LossAndGradient(inputs, targets, start_h_, start_c_, ws, gradient);
  const float norm = ClipGradientNorm(gradient, static_cast<float>(options_.gradient_clip_norm));
  if (!std::isfinite(loss) || !std::isfinite(norm)) return;  // keep the weights usable
  adam_.set_learning_rate(current_learning_rate());
  adam_.Step(network_.parameters(), gradient);
  last_loss_ = loss;
}

float LstmPredictor::RoundStoredState(float value) { return FromBfloat16(ToBfloat16(value)); }

double LstmPredictor::current_learning_rate() const {
  const auto steps = static_cast<double>(adam_.step_count());
  return options_.final_learning_rate + (options_.learning_rate - options_.final_learning_rate) *
                                            std::exp(-steps / options_.learning_rate_decay_steps);
}

void LstmPredictor::ResetSequence() {
  h_.setZero();
  c_.setZero();
  pairs_ = 0;
  since_train_ = 0;
  last_learnable_ = false;
  prediction_ = 0.0f;
}

std::size_t LstmPredictor::MemoryBytes() const {
  return network_.MemoryBytes() + adam_.MemoryBytes() +
         static_cast<std::size_t>(ring_.size() + h_.size() + c_.size() + start_h_.size() +
                                  start_c_.size()) *
             sizeof(float) +
         static_cast<std::size_t>(states_.size()) * sizeof(std::uint16_t);
}

}  // namespace nightjar::core
