// CusumDetector: the two-sided tabular CUSUM (Page 1954) on one stream.
//
// With K = k sigma and H = h sigma (data units) and C+_0 = C-_0 = 0:
//   C+_t = max(0, x_t - (target + K) + C+_{t-1}),
//   C-_t = max(0, (target - K) - x_t + C-_{t-1}),
// and N+ / N- count the consecutive samples with C+ > 0 / C- > 0. A signal is
// C+ >= H or C- >= H, i.e. ratio() >= 1 (the alarm layer's convention, core/alarm.h; it
// differs from the textbook "> H" only on the threshold itself). After a signal the
// shifted mean is estimated as target + K + C+/N+ (or target - K - C-/N-).
// k = 0.5 tunes the chart to a one-sigma shift; CusumThresholdForArl in arl_design.h
// gives h for an in-control ARL, and CusumAutocorrelationFactor / Ar1Prewhitener
// handle autocorrelated input.
//
// Cap (set_cap): while a fault of size delta sigma lasts, C+ grows by about
// (delta - k) sigma per sample; once it ends, C+ falls by only about K per sample, so
// an alarm that lasted hours would take hours more to clear. Clamping C+- at
// max_ratio * H bounds that: the statistic is back below H within about
// (max_ratio - 1) h / k samples after the fault ends, however long it lasted. The cap
// does not change when a signal is first raised (it binds only above H), and
// ShiftEstimate() keeps using the uncapped sum of the current run, so the estimate is
// not biased by the cap.
//
// Non-finite inputs are ignored (state unchanged; Add reports the current state).
// Add() never allocates. Thread-safety: none; owned by one thread (the channel's
// worker). Ownership: a plain copyable value type.
#pragma once

#include <cstdint>

#include "core/status.h"

namespace nightjar::core {

class CusumDetector {
 public:
  struct Reading {
    double upper = 0.0;          // C+, data units
    double lower = 0.0;          // C-, data units
    std::int64_t upper_run = 0;  // N+: consecutive samples with C+ > 0
    std::int64_t lower_run = 0;  // N-: consecutive samples with C- > 0
    double ratio = 0.0;          // max(C+, C-) / H
    bool upper_signal = false;   // C+ >= H (mean shifted up)
    bool lower_signal = false;   // C- >= H (mean shifted down)
    bool signal = false;         // either side
  };

  // k >= 0 and h > 0 in units of sigma; sigma > 0 in data units. All must pass Validate
  // (asserted); in a release build they are clamped into range.
  CusumDetector(double k, double h, double target = 0.0, double sigma = 1.0);

  // OK when 0 <= k < inf, 0 < h < inf, target finite and 0 < sigma < inf; otherwise
  // InvalidArgument naming the first bad parameter.
  static Status Validate(double k, double h, double target, double sigma);

  // Feeds one sample and returns the chart's state after it.
  Reading Add(double x);

  // max(C+, C-) / H for the latest sample; 0 before the first one.
  double ratio() const;
  // The state as of the latest sample (what the last Add returned).
  Reading reading() const;

  // Estimated process mean, data units: target + K + S+/N+ when the upper side has the
  // larger ratio and a run in progress, target - K - S-/N- for the lower side, the
  // target when neither side has a run. S+- is the sum of (x - target -+ K) over the
  // current run, which equals C+- unless the cap has bound.
  double ShiftEstimate() const;

  // Back to C+- = 0, no runs. Parameters and cap are kept.
  void Reset();
  // Clamp C+- at max_ratio * H; max_ratio = +inf removes the cap (the default).
  // InvalidArgument (and no change) unless max_ratio >= 1 (a cap below H would never
  // let the chart signal). Applies from the next sample.
  Status set_cap(double max_ratio);
  // New standard deviation: K and H rescale, and C+- (and the run sums) are rescaled
  // with them so ratio() is unchanged. InvalidArgument unless 0 < sigma < inf.
  Status set_sigma(double sigma);

  double k() const { return k_; }
  double h() const { return h_; }
  double target() const { return target_; }
  double sigma() const { return sigma_; }
  double cap() const { return cap_; }
  // K = k sigma and H = h sigma, data units.
  double reference_value() const { return k_ * sigma_; }
  double decision_interval() const { return h_ * sigma_; }

 private:
  friend class ChannelStateAccess;  // checkpoints (channel_state.cc)
  double k_;
  double h_;
  double target_;
  double sigma_;
  double cap_;  // max_ratio, +inf when uncapped
  double upper_ = 0.0;
  double lower_ = 0.0;
  double upper_sum_ = 0.0;  // uncapped sum of the current upper run
  double lower_sum_ = 0.0;
  std::int64_t upper_run_ = 0;
  std::int64_t lower_run_ = 0;
};

}  // namespace nightjar::core
