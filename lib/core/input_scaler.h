// InputScaler: maps a channel's engineering units to the unit scale the LSTM sees.
//
// Learns mean and standard deviation with Welford's recursion for as long as the
// channel is learning, so the scale covers as much of the normal range as the learning
// period saw; Freeze() (called when the channel arms) then fixes them (default) or
// switches to an exponentially weighted update that follows slow operating-point moves. The engine
// only calls Learn() with samples it trusts (not in alarm, not flagged bad), so a fault does not
// move the scale. Thread-safety: none; one channel's state is touched by one thread.
#pragma once

#include <cstdint>

#include "core/running_moments.h"

namespace nightjar::core {

struct InputScalerOptions {
  // Samples that must be learnt before the predictor starts. Default 120.
  int warmup_samples = 120;
  // Per-sample weight of the slow update after Freeze(); 0 keeps the scale fixed. Default 0.
  double adapt_alpha = 0.0;
  // Smallest scale, engineering units; 0 means 1e-4 * |mean| (a constant channel must
  // not divide by zero). Default 0.
  double min_scale = 0.0;
};

class InputScaler {
 public:
  // Scaled inputs are clamped to +-kMaxScaled so one wild value cannot saturate the model.
  static constexpr double kMaxScaled = 8.0;

  explicit InputScaler(const InputScalerOptions& options);

  void Learn(double value);
  // Ends the Welford phase (the channel has armed).
  void Freeze() { frozen_ = true; }
  bool ready() const { return learnt_ >= options_.warmup_samples; }

  double Scale(double value) const;
  double Unscale(double scaled) const { return mean_ + scaled * scale_; }
  double mean() const { return mean_; }
  double scale() const { return scale_; }

 private:
  friend class ChannelStateAccess;  // checkpoints (channel_state.cc)
  void RefreshScale(double stddev);

  InputScalerOptions options_;
  RunningMoments warmup_moments_;
  std::int64_t learnt_ = 0;
  bool frozen_ = false;
  double mean_ = 0.0;
  double variance_ = 0.0;
  double scale_ = 1.0;
};

}  // namespace nightjar::core
