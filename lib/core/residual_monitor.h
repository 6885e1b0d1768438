// ResidualMonitor: from raw prediction residuals to one alarm ratio per sample.
//
// Standardises each residual with a robust online scale (core/residual_scale.h),
// corrects for serial correlation (positively correlated residuals shorten a chart's
// real ARL0; DESIGN-NOTES §2), and runs three charts on it: a two-sided
// tabular CUSUM (small sustained shifts), an EWMA chart (slow drifts) and an
// individual-value limit (spikes). The alarm ratio is the largest statistic/threshold
// of the three; >= 1 means at least one chart signals.
// Scale and autocorrelation learn only when the caller says the sample is trusted, so
// a fault is not learnt as normal.
// Thread-safety: none; owned by one channel.
#pragma once

#include <cstdint>

#include "core/alert.h"
#include "core/cusum_detector.h"
#include "core/ewma_detector.h"
#include "core/residual_scale.h"
#include "core/running_moments.h"
#include "core/threshold_design.h"

namespace nightjar::core {

// Residuals (or departures) this far out, in sigmas of their settled scale, are not
// learnt from: a glitch must not teach a chart that glitches are normal (common practice:
// robust learning gate). Shared by the pipeline, the level chart and tune's sweep.
inline constexpr double kLearnGateSigmas = 6.0;

struct ResidualMonitorOptions {
  // Per-sample weight of the residual scale estimate (about 1/alpha samples of memory).
  double scale_alpha = 1.0 / 512.0;
  // Smallest residual sigma, in scaled input units (input standard deviations). Default 1e-3.
  double scale_floor = 1e-3;
  // Huber clipping of the scale update, in sigmas. Default 4.
  double scale_clip = 4.0;
  // Per-sample weight of the serial-correlation estimates. Default 1/2048.
  double autocorrelation_alpha = 1.0 / 2048.0;
  // Divide each chart's input by its measured variance-inflation factor: the in-control
  // standard deviation of an exponentially smoothed z (smoothing 1/32 for the CUSUM,
  // the chart's own lambda for the EWMA) over what independent residuals would give.
  // For AR(1) residuals this tends to the textbook factors of core/arl_design.h; it also
  // covers the slow bias wander of an online-trained model, which lag-1 misses.
  // Default true.
  bool correct_autocorrelation = true;
  // CUSUM sums are capped at cusum_cap * h so an alarm that lasted hours clears within
  // about (cap - 1 + deadband) * h / k samples after the fault ends. Default 1.5.
  double cusum_cap = 1.5;
};

struct ResidualReading {
  double z = 0.0;      // standardised residual
  double ratio = 0.0;  // largest statistic / threshold over the charts (0 if not armed)
  Detector detector = Detector::kCusum;  // the chart giving that ratio
  double statistic = 0.0;                // its statistic
  double threshold = 0.0;                // its threshold
  std::int64_t run_length = 0;           // CUSUM samples since its sum left zero (CUSUM only)
};

class ResidualMonitor {
 public:
  explicit ResidualMonitor(const ResidualMonitorOptions& options);

  // Builds the charts; until then Observe() only learns. The spike limit is raised to
  // kSpikeTailMargin times the largest |z| seen in the second half of learning when that
  // is larger: model residuals have heavier tails than the normal tables assume
  // (DESIGN-NOTES §2), and a limit the learning period already crossed is a nuisance.
  void Arm(const Thresholds& thresholds);
  // Marks the start of the part of learning whose residual tail sets the spike limit.
  void StartTailWindow() { tail_window_open_ = true; }
  static constexpr double kSpikeTailMargin = 1.2;
  // For a recording known to be normal (`nightjar learn`): raises the CUSUM decision
  // interval, the EWMA limit factor and the spike limit so the largest ratio each chart
  // reached on trusted samples since Arm() sits at 1 / kSpikeTailMargin, when it was
  // higher: the learning tail rule above, carried on over the charted part of the
  // recording (DESIGN-NOTES §2: the normal-theory limits fire on real residuals). The
  // CUSUM's record is taken from an uncapped copy of its sums, since the chart's own stop
  // at cusum_cap. One raise is at most kMaxRecordRaise, so a "normal" recording that held
  // a real upset cannot blind the channel (a tenfold bound spared no more false alarms on
  // the open datasets; tests/quality/RESULTS.md). Charts restart. Returns
  // true when a limit moved. No effect unless armed.
  bool CoverInControlRecord();
  static constexpr double kMaxRecordRaise = 2.0;
  // Largest CUSUM, EWMA and spike ratios on trusted samples since Arm() (0 before arming).
  double cusum_record() const { return cusum_record_; }
  double ewma_record() const { return ewma_record_; }
  double spike_record() const { return spike_record_; }
  bool armed() const { return armed_; }
  // Largest trusted |z| since StartTailWindow() (frozen once armed): what Arm() raised the
  // spike limit to cover. Read by the threshold sweep, which arms charts of its own.
  double learning_tail() const { return learning_tail_; }
  const Thresholds& thresholds() const { return thresholds_; }

  // Standardises `residual` with the present scale and, when armed, updates the charts.
  // When `learn`, the scale and autocorrelation estimates take the residual in too.
  ResidualReading Observe(double residual, bool learn);

  // Zeroes the charts (used when a channel is re-baselined).
  void ResetCharts();

  double sigma() const { return scale_.sigma(); }
  bool scale_settled() const { return scale_.settled(); }
  double autocorrelation() const { return autocorrelation_.value(); }
  // Until the inflation factors below are measured (enough trusted samples), take the
  // largest one allowed instead of the AR(1) stand-in: for an input whose correlation
  // lag-1 misses (a level that follows a load cycle) the stand-in is far too small.
  // Set by the owner after construction; not part of a checkpoint.
  void AssumeLargestInflationUntilMeasured() { largest_until_measured_ = true; }
  // Present variance-inflation factors (>= 1) applied to the CUSUM and EWMA inputs.
  double cusum_inflation() const;
  double ewma_inflation() const;

 private:
  friend class ChannelStateAccess;  // checkpoints (channel_state.cc)
  ResidualMonitorOptions options_;
  ResidualScale scale_;
  Lag1Autocorrelation autocorrelation_;
  // Smoothed z at the CUSUM's and the EWMA's time scale, and their in-control spread.
  double smoothed_cusum_ = 0.0;
  double smoothed_ewma_ = 0.0;
  ExponentialMoments spread_cusum_;
  ExponentialMoments spread_ewma_;
  double ewma_lambda_for_spread_ = 0.1;
  Thresholds thresholds_;
  CusumDetector cusum_;
  EwmaDetector ewma_;
  bool armed_ = false;
  bool largest_until_measured_ = false;
  bool tail_window_open_ = false;
  double learning_tail_ = 0.0;  // largest trusted |z| since StartTailWindow()
  // Not checkpointed: a record covers one recording, concluded in the process that read it.
  double cusum_record_ = 0.0;
  double record_upper_ = 0.0;  // uncapped CUSUM sums over trusted samples, for the record
  double record_lower_ = 0.0;
  double ewma_record_ = 0.0;
  double spike_record_ = 0.0;
};

}  // namespace nightjar::core
