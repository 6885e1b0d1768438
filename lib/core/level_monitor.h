// LevelMonitor: how far a channel's value has moved from the level it usually runs at.
//
// A one-step forecaster follows a sustained change of level within tens of samples: its
// residual shrinks and the residual charts clear while the fault is still there
// (DESIGN-NOTES §3). This monitor charts value - baseline instead, where the baseline is
// an exponentially weighted mean of the value that learns only while this chart is in
// control: it does not follow a fault, and it follows a slow move of the operating point
// at its own pace (about 1/baseline_alpha samples). The departure goes through the same
// machinery as the residuals (core/residual_monitor.h: robust scale, serial-correlation
// correction, CUSUM and EWMA charts), with no spike limit.
//
// A lone far-off value is the residual charts' business, so the departure is winsorised
// at the learning gate (kLearnGateSigmas) and learnt, not gated out: a load that pulses
// far off its level in normal operation widens the chart rather than raising it at every
// pulse. A signal whose level wanders in normal operation has a wide, strongly correlated
// departure, and the correction makes the chart insensitive there rather than noisy
// (until the correction is measured, the largest factor stands in); a signal that holds
// a level shows a shift of a few sigma at once.
//
// Independent of the residual charts and of the alarm, so threshold tuning can record its
// ratio once (core/residual_tap.h).
// Thread-safety: none; owned by one channel.
#pragma once

#include <cstdint>

#include "core/alert.h"
#include "core/residual_monitor.h"
#include "core/threshold_design.h"

namespace nightjar::core {

struct LevelOptions {
  // Chart the departure from the learnt level besides the forecast residual. Default true.
  bool enabled = true;
  // Per-sample weight of the baseline: about 1/alpha samples of memory. Default 1/512,
  // the residual scale's (residual.scale_alpha): the level learns at the pace the charts'
  // scale does, and follows a daily load cycle closely enough not to call it a fault
  // (1/4096 gave 14 false alarms on the demo day, 1/512 two; tests/quality/RESULTS.md).
  double baseline_alpha = 1.0 / 512.0;
  // Budget of false level alerts per channel per day, designed as thresholds.
  // false_alarms_per_day is for the residual charts (a third per chart; the level has no
  // spike chart). Default 0.5, the residual charts' default.
  double false_alarms_per_day = 0.5;
};

class LevelMonitor {
 public:
  LevelMonitor(const LevelOptions& options, const ResidualMonitorOptions& residual);

  // The baseline starts at `level`, worth `samples` trusted samples, and the charts from
  // zero; the departure's learnt scale is kept. Until the baseline has taken in
  // 1/baseline_alpha samples it is their running mean (the EWMA's usual warm start), so
  // a first guess does not linger.
  void Start(double level, std::int64_t samples);
  bool started() const { return started_; }

  // Charts `value`; `unit` is the input scale (engineering units per scaled unit), so the
  // departure is in the same scaled units as the residual. The baseline, the departure's
  // scale and its serial correlation learn only when `trusted` (not flat, not in a resume
  // hold) and the chart is in control, from the departure winsorised at kLearnGateSigmas
  // of its sigma (the same value is charted). The
  // reading's detector is kLevel and its z the departure in sigmas; ratio 0 until armed.
  ResidualReading Observe(double value, double unit, bool trusted);

  // Builds the CUSUM and EWMA from `thresholds` (its spike limit is ignored).
  void Arm(const Thresholds& thresholds);
  bool armed() const { return charts_.armed(); }
  // As ResidualMonitor::CoverInControlRecord, for a known-good recording.
  bool CoverInControlRecord() { return charts_.CoverInControlRecord(); }
  void ResetCharts();

  double baseline() const { return baseline_; }
  // The departure's sigma, in scaled units.
  double sigma() const { return charts_.sigma(); }
  const Thresholds& thresholds() const { return charts_.thresholds(); }

 private:
  friend class ChannelStateAccess;  // checkpoints (channel_state.cc)
  LevelOptions options_;
  ResidualMonitor charts_;
  double baseline_ = 0.0;
  std::int64_t baseline_samples_ = 0;  // trusted samples in the baseline
  bool started_ = false;
  bool signalling_ = false;  // the last reading's ratio was >= 1
};

}  // namespace nightjar::core
