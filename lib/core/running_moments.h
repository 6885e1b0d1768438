// Online moments of one sample stream, updated one value at a time in O(1):
//  * RunningMoments: equally weighted mean and sample variance (Welford 1962 / Knuth,
//    TAOCP vol. 2, 4.2.2), which stays accurate when the mean is large relative to the
//    spread, where the sum-of-squares formula cancels catastrophically.
//  * ExponentialMoments: exponentially weighted mean and variance (Finch 2009), for
//    quantities that drift and must forget old data.
//  * Lag1Autocorrelation: exponentially weighted lag-1 autocorrelation, the phi that
//    arl_design.h uses to correct chart designs for autocorrelated residuals.
//
// Non-finite inputs (NaN, +-inf) are ignored: the state is left unchanged, so one bad
// sample cannot poison the estimate forever. Callers that must count such samples do so
// before calling Add (the engine counts and drops bad samples).
// Add() never allocates. Thread-safety: none; each object is owned by one thread (the
// channel's worker). Ownership: plain copyable value types holding no pointers.
#pragma once

#include <cstdint>

#include "core/status.h"

namespace nightjar::core {

// Equally weighted mean and variance by the Welford/Knuth recurrence.
class RunningMoments {
 public:
  RunningMoments() = default;

  void Add(double x);
  void Reset();

  std::int64_t count() const { return count_; }
  // 0 when empty.
  double mean() const { return mean_; }
  // Sample variance S_n / (n - 1); 0 while count() < 2 (no spread is known yet).
  double variance() const;
  // sqrt(variance()).
  double stddev() const;
  // Population variance S_n / n; 0 when empty.
  double population_variance() const;

 private:
  friend class ChannelStateAccess;  // checkpoints (channel_state.cc)
  std::int64_t count_ = 0;
  double mean_ = 0.0;
  double sum_sq_dev_ = 0.0;  // S_n = sum (x_i - mean_n)^2, updated without cancellation
};

// Exponentially weighted mean and variance with per-sample weight alpha in (0, 1]:
//   delta = x - mu;  mu += alpha * delta;  v = (1 - alpha) * (v + alpha * delta^2),
// starting at mu = x_1, v = 0. This equals the weighted mean and weighted (biased)
// variance with weights (1 - alpha)^(n-1) for x_1 and alpha (1 - alpha)^(n-i) for x_i,
// i >= 2, which sum to 1 (Finch 2009, "Incremental calculation of weighted mean and
// variance"). alpha = 1 keeps only the latest sample (mean = x, variance 0).
class ExponentialMoments {
 public:
  // alpha must pass Validate (asserted); in a release build it is clamped into (0, 1].
  explicit ExponentialMoments(double alpha);

  // OK when 0 < alpha <= 1; otherwise InvalidArgument naming alpha.
  static Status Validate(double alpha);

  void Add(double x);
  void Reset();

  double alpha() const { return alpha_; }
  std::int64_t count() const { return count_; }
  // 0 when empty.
  double mean() const { return mean_; }
  // Weighted variance; 0 while count() < 2.
  double variance() const { return variance_; }
  double stddev() const;

 private:
  friend class ChannelStateAccess;  // checkpoints (channel_state.cc)
  double alpha_;
  std::int64_t count_ = 0;
  double mean_ = 0.0;
  double variance_ = 0.0;
};

// Exponentially weighted estimate of the lag-1 autocorrelation of a stream: the
// weighted Pearson correlation of the consecutive pairs (x_{t-1}, x_t), with the pair
// weights of ExponentialMoments. Means, variances and the covariance of the two
// coordinates follow the Finch recursion (the covariance by the same bilinear update:
// c = (1 - alpha) (c + alpha dx dy)), which equals the exact weighted moments. The
// weighted covariance matrix is positive semi-definite, so |c| <= sqrt(vx vy) and the
// estimate lies in [-1, 1] by Cauchy-Schwarz; value() also clamps against rounding.
// Deterministic: the same inputs give the same estimate. The weights' effective sample
// size 1 / sum(w^2) is about (2 - alpha) / alpha pairs, so with Bartlett's variance
// (1 - phi^2) / n for the lag-1 autocorrelation of an AR(1) stream (from memory) the
// estimate's standard deviation is roughly sqrt((1 - phi^2) alpha / 2): alpha = 1/2000
// gives about +-0.02 at phi = 0.5.
class Lag1Autocorrelation {
 public:
  // alpha must pass ExponentialMoments::Validate (asserted; clamped in release).
  explicit Lag1Autocorrelation(double alpha);

  void Add(double x);
  void Reset();

  double alpha() const { return alpha_; }
  // Finite samples seen (pairs = count() - 1).
  std::int64_t count() const { return count_; }
  // Estimate in [-1, 1]. 0 ("no evidence") until both coordinates have a nonzero
  // weighted spread, e.g. while fewer than three samples were seen or on a constant
  // stream.
  double value() const;

 private:
  friend class ChannelStateAccess;  // checkpoints (channel_state.cc)
  double alpha_;
  std::int64_t count_ = 0;
  double previous_ = 0.0;
  double mean_lagged_ = 0.0;   // weighted mean of x_{t-1}
  double mean_current_ = 0.0;  // weighted mean of x_t
  double var_lagged_ = 0.0;
  double var_current_ = 0.0;
  double covariance_ = 0.0;
};

}  // namespace nightjar::core
