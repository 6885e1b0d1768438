// EwmaDetector: the two-sided EWMA control chart (Roberts 1959) on one stream.
//
//   z_t = lambda x_t + (1 - lambda) z_{t-1},   z_0 = target,
//   limits target +- L sigma sqrt(lambda / (2 - lambda) [1 - (1 - lambda)^(2t)])  (exact)
//   or     target +- L sigma sqrt(lambda / (2 - lambda))                          (asymptotic)
//
// The exact limits use the variance of z_t given z_0 = target, so they are narrow for
// the first samples after a Reset (lambda L sigma at t = 1) and widen to the asymptotic
// ones within a few 1/lambda samples; they give a fast first response at the cost of a
// slightly shorter in-control ARL than the asymptotic design (arl_design.h assumes
// asymptotic limits). Designs: EwmaLimitForArl in arl_design.h gives L for an in-control
// ARL. For autocorrelated input, scale sigma by EwmaAutocorrelationFactor or prewhiten
// (Ar1Prewhitener); see arl_design.h.
//
// A signal is |z_t - target| >= half-width, i.e. ratio() >= 1, the same convention as
// the alarm layer (core/alarm.h); it differs from "> limit" only on the limit itself.
// Non-finite inputs are ignored (state unchanged; Add reports the current state).
// Add() never allocates. Thread-safety: none; owned by one thread (the channel's
// worker). Ownership: a plain copyable value type.
#pragma once

#include <cstdint>

#include "core/status.h"

namespace nightjar::core {

class EwmaDetector {
 public:
  struct Reading {
    double statistic = 0.0;    // z_t, data units
    double upper_limit = 0.0;  // target + half-width
    double lower_limit = 0.0;  // target - half-width
    double ratio = 0.0;        // |z_t - target| / half-width; >= 1 is a signal
    bool signal = false;
  };

  // lambda in (0, 1]: weight of the newest sample. limit_factor = L > 0: half-width in
  // standard deviations of z. sigma > 0: standard deviation of x in data units. All
  // arguments must pass Validate (asserted); in a release build they are clamped into
  // range so behaviour stays defined.
  EwmaDetector(double lambda, double limit_factor, double target = 0.0, double sigma = 1.0,
               bool exact_limits = true);

  // OK when 0 < lambda <= 1, 0 < limit_factor < inf, target finite and 0 < sigma < inf;
  // otherwise InvalidArgument naming the first bad parameter.
  static Status Validate(double lambda, double limit_factor, double target, double sigma);

  // Feeds one sample and returns the chart's state after it.
  Reading Add(double x);

  // |z - target| / half-width for the latest sample; 0 before the first one.
  double ratio() const;
  // The state as of the latest sample (what the last Add returned).
  Reading reading() const;

  // Fresh chart: z back at the target and the exact-limit clock restarted (narrow first
  // limits again). Target and sigma are kept.
  void Reset();
  // z back at the target but the limits keep their present width: the conservative
  // choice after a re-baseline, when the first residuals are still settling.
  void Reseat();
  // New standard deviation of x (e.g. from a re-estimated residual scale); z and the
  // clock are kept, the limits rescale. InvalidArgument (and no change) unless
  // 0 < sigma < inf.
  Status set_sigma(double sigma);
  // New target; z is re-seated at it and the exact-limit clock restarts, as after
  // Reset. InvalidArgument (and no change) unless the target is finite.
  Status set_target(double target);

  double lambda() const { return lambda_; }
  double limit_factor() const { return limit_factor_; }
  double target() const { return target_; }
  double sigma() const { return sigma_; }
  bool exact_limits() const { return exact_limits_; }
  double statistic() const { return z_; }
  // Samples since the last Reset or set_target (the exact-limit clock t).
  std::int64_t count() const { return count_; }
  // Half-width of the limits for the latest sample, data units; 0 before the first.
  double half_width() const;
  // Half-width the limits tend to, L sigma sqrt(lambda / (2 - lambda)).
  double asymptotic_half_width() const;

 private:
  friend class ChannelStateAccess;  // checkpoints (channel_state.cc)
  double lambda_;
  double limit_factor_;
  double target_;
  double sigma_;
  bool exact_limits_;
  double asymptotic_factor_;  // sqrt(lambda / (2 - lambda))
  double z_;
  std::int64_t count_ = 0;
  // (1 - lambda)^(2t), the part of the asymptotic variance not yet reached; flushed to
  // 0 once negligible so it never turns subnormal.
  double decay_ = 1.0;
};

}  // namespace nightjar::core
