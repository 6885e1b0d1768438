// ResidualScale: a robust online estimate of a residual stream's standard deviation.
//
// Exponentially weighted mean absolute residual with Huber-style clipping at
// clip * sigma (one outlier moves it by a bounded amount), converted to a standard
// deviation with the normal factor sqrt(pi/2), and floored: residuals of a channel that
// holds its value are near zero and z would explode otherwise (sampled analysers,
// quantised sensors). The first samples are averaged with weight 1/n until 1/n falls
// below alpha, so early estimates are plain means rather than the first value.
// Thread-safety: none; owned by one channel.
#pragma once

#include <cstdint>

namespace nightjar::core {

class ResidualScale {
 public:
  // alpha: per-sample weight (e.g. 1/512); floor: smallest sigma returned; clip: Huber
  // clipping in sigmas (4 keeps the Gaussian bias below 0.1 %, common practice).
  ResidualScale(double alpha, double floor, double clip);

  void Update(double residual);
  double sigma() const;
  std::int64_t count() const { return count_; }
  // True once enough residuals are in for sigma() to be trusted (and clipping to start).
  bool settled() const { return count_ >= kSettledSamples; }

  static constexpr std::int64_t kSettledSamples = 32;

 private:
  friend class ChannelStateAccess;  // checkpoints (channel_state.cc)
  double alpha_;
  double floor_;
  double clip_;
  double mean_abs_ = 0.0;
  std::int64_t count_ = 0;
};

}  // namespace nightjar::core
