// LstmPredictor: online one-step-ahead predictor of one channel's scaled value.
//
// Each sample is a feature vector: features[0] is the channel's scaled value, the rest
// are exogenous inputs (e.g. time-of-day sin/cos). The predictor runs an LSTM
// (lstm_network.h) over the samples and predicts features[0] of the NEXT sample. While
// learning it keeps the last `window` samples with the recurrent state that preceded
// each, and every `train_every` learnable samples takes one Adam step on truncated BPTT
// over the last min(window, available) contiguous training pairs, starting from the
// stored state of the window's first pair.
//
// Thread-safety: not thread-safe; one thread owns a predictor. The LstmWorkspace passed
// to Observe is per-thread scratch shared by all predictors that thread owns.
// Ownership: owns its weights, Adam moments and rings; borrows the workspace and the
// feature array per call.
// Observe and ResetSequence never allocate; same options and samples give
// bit-identical predictions (on one build and CPU).
#pragma once

#include <cstddef>
#include <cstdint>

#include "core/adam_optimizer.h"
#include "core/lstm_network.h"
#include "core/status.h"

namespace nightjar::core {

struct LstmPredictorOptions {
  // Features per sample: features[0] is the scaled value, the rest exogenous inputs.
  // Default 3 (value, sin and cos of time of day). Range [1, 256].
  int input_size = 3;
  // LSTM hidden units H. Default 32. Range [1, 1024]. Multiples of the SIMD width
  // (16 floats with AVX-512, 8 with AVX2) take the fast kernels.
  int hidden_size = 32;
  // Truncated-BPTT window W in samples: the longest span a gradient looks back over and
  // the number of past samples kept. Default 32. Range [1, 1024], and
  // hidden_size * window <= 8192 so training never needs the heap.
  int window = 32;
  // S: one training step every S learnable samples. Default 1 (every sample). >= 1.
  int train_every = 1;
  // Adam step size, decaying from learning_rate to final_learning_rate as
  //   lr(n) = final + (initial - final) * exp(-n / learning_rate_decay_steps)
  // over the n training steps taken. Training once per sample on windows that overlap
  // in all but one pair uses every sample ~W times, and Adam moves each weight by
  // about lr per step whatever the gradient size, so a fixed rate trades warm-up speed
  // against chasing the noise of the latest samples. Measured on the test's noisy sine
  // (period 50, noise sd 0.05, defaults otherwise), one-step MAE over samples
  // 15 000-20 000 relative to the naive "next = last" forecast: fixed 1e-3: 0.78x;
  // fixed 1e-5: 0.45x, but only from ~8000 samples on; these defaults: ~0.51x over
  // samples 2000-4000 and ~0.47x later, and after the sine's period and amplitude
  // change they are back at that level within ~2000 samples.
  // Initial rate; default 1e-3 (Kingma & Ba's default). Must be > 0.
  double learning_rate = 1e-3;
  // Steady-state rate; default 3e-5. Must be > 0 and <= learning_rate.
  double final_learning_rate = 3e-5;
  // Decay time constant in training steps; default 1000. Must be > 0.
  double learning_rate_decay_steps = 1000.0;
  // Gradients are scaled to at most this Euclidean norm before the Adam step, so one
  // outlier window (e.g. a spike the detector has not flagged yet) cannot dominate
  // Adam's moment estimates. Default 1.0; <= 0 disables clipping.
  double gradient_clip_norm = 1.0;
  // Added to the forget-gate bias at initialisation so the cell starts by remembering.
  // Default 1.0.
  double forget_bias = 1.0;
  // Seed of the weight initialisation. Default 1.
  std::uint64_t seed = 1;
};

class LstmPredictor {
 public:
  // OK if options describe a usable predictor, else InvalidArgument naming the field.
  static Status Validate(const LstmPredictorOptions& options);
  // Validates, then constructs.
  static Result<LstmPredictor> Create(const LstmPredictorOptions& options);
  // Options must be valid (asserted). Allocates everything the predictor will ever use.
  explicit LstmPredictor(const LstmPredictorOptions& options);

  // A workspace big enough for predictors built with these options.
  static LstmWorkspace<float> MakeWorkspace(const LstmPredictorOptions& options);

  // Prediction of features[0] of the next sample, in scaled units; 0 until a sample
  // has been observed (since construction or the last ResetSequence).
  float prediction() const { return prediction_; }

  // Consumes one sample of options().input_size features. ws must Fit the predictor
  // (MakeWorkspace); one that does not is a bug (asserted; release builds drop the sample).
  // If `learn` and the previous sample was also observed with learn = true, the pair
  // (previous features -> this features[0]) joins the training history, and every
  // train_every such pairs one Adam step runs. If !learn the history restarts, and this
  // sample will not serve as the input of a pair either (its features[0] may be the
  // model's own forecast while the channel is in alarm). Then the recurrent state
  // advances with these features under the current weights and prediction() updates.
  // A sample with a non-finite feature is ignored apart from restarting the history.
  void Observe(const float* features, bool learn, LstmWorkspace<float>& ws);

  // After a data gap: zero the recurrent state and clear the training history.
  // The weights and Adam moments are kept.
  void ResetSequence();

  // Heap bytes owned: weights, Adam moments, the sample ring and the recurrent state.
  std::size_t MemoryBytes() const;

  const LstmPredictorOptions& options() const { return options_; }
  const LstmNetwork<float>& network() const { return network_; }
  // Recurrent state after the newest sample (what prediction() was computed from); a
  // caller may copy it to run the network ahead on its own (closed-loop forecasts).
  const Eigen::VectorXf& hidden_state() const { return h_; }
  const Eigen::VectorXf& cell_state() const { return c_; }
  // Adam steps taken so far.
  std::int64_t train_steps() const { return adam_.step_count(); }
  // Step size the next training step will use.
  double current_learning_rate() const;
  // What a stored recurrent-state value reads back as (bfloat16, round to nearest even).
  static float RoundStoredState(float value);

  // Loss of the last training window before its update (0 before the first).
  float last_loss() const { return last_loss_; }

 private:
  friend class ChannelStateAccess;  // checkpoints (channel_state.cc)
  void Train(LstmWorkspace<float>& ws);
  Eigen::Index Slot(Eigen::Index back) const;  // ring column `back` entries before head_

  LstmPredictorOptions options_;
  LstmNetwork<float> network_;
  AdamOptimizer<float> adam_;
  // Ring of the last W samples, one column each: [x (I); target (1)], the target being
  // features[0] of the sample after x; and beside it the recurrent state before x,
  // [h (H); c (H)], stored as bfloat16. That state only seeds a training window and was
  // computed under older weights anyway, so 8 mantissa bits lose nothing that matters,
  // and halving it keeps a whole channel within about 64 KiB at H = 32.
  Eigen::MatrixXf ring_;
  Eigen::Matrix<std::uint16_t, Eigen::Dynamic, Eigen::Dynamic> states_;
  Eigen::VectorXf start_h_;  // window-start state decoded for training
  Eigen::VectorXf start_c_;
  Eigen::VectorXf h_;
  Eigen::VectorXf c_;
  Eigen::Index head_ = 0;        // ring column the next sample goes to
  Eigen::Index pairs_ = 0;       // contiguous training pairs ending at the newest sample
  int since_train_ = 0;          // learnable pairs since the last training step
  bool last_learnable_ = false;  // newest ring entry may start a training pair
  float prediction_ = 0.0f;
  float last_loss_ = 0.0f;
};

}  // namespace nightjar::core
