#include "core/residual_monitor.h"

#include <algorithm>
#include <cmath>

#include "core/arl_design.h"

namespace nightjar::core {

namespace {
constexpr double kAutocorrelationClip = 6.0;
// Smoothing for the CUSUM's inflation factor: about the run length over which a k = 0.5
// CUSUM gathers its evidence at high ARL0 (common practice for batch-means estimates).
constexpr double kCusumSpreadLambda = 1.0 / 32.0;
// The factor needs this many trusted samples before it is believed.
constexpr std::int64_t kInflationSamples = 512;
constexpr double kMaxInflation = 6.0;

// In-control standard deviation of an EWMA with weight lambda over independent N(0, 1).
double IndependentSpread(double lambda) { return std::sqrt(lambda / (2.0 - lambda)); }
}  // namespace

ResidualMonitor::ResidualMonitor(const ResidualMonitorOptions& options)
    : options_(options),
      scale_(options.scale_alpha, options.scale_floor, options.scale_clip),
      autocorrelation_(options.autocorrelation_alpha),
      spread_cusum_(options.autocorrelation_alpha),
      spread_ewma_(options.autocorrelation_alpha),
      cusum_(0.5, 1e300),
      ewma_(0.1, 1e300) {}

void ResidualMonitor::Arm(const Thresholds& thresholds) {
  thresholds_ = thresholds;
  thresholds_.spike_limit = std::max(thresholds.spike_limit, kSpikeTailMargin * learning_tail_);
  cusum_ = CusumDetector(thresholds.cusum_k, thresholds.cusum_h);
  // Arm() receives validated thresholds, so these setters cannot fail.
  (void)cusum_.set_cap(options_.cusum_cap);
  ewma_ = EwmaDetector(thresholds.ewma_lambda, thresholds.ewma_l);
  if (thresholds.ewma_lambda != ewma_lambda_for_spread_) {
    // The EWMA's spread was measured at another lambda: measure it afresh.
    ewma_lambda_for_spread_ = thresholds.ewma_lambda;
    spread_ewma_.Reset();
  }
  cusum_record_ = 0.0;
  ewma_record_ = 0.0;
  spike_record_ = 0.0;
  record_upper_ = 0.0;
  record_lower_ = 0.0;
  armed_ = true;
}

bool ResidualMonitor::CoverInControlRecord() {
  if (!armed_) return false;
  // A chart whose record is r needs its limit times margin * r to leave r at 1 / margin.
  // The uncapped CUSUM sums do not depend on h, so scaling h scales their ratio the same way.
  const auto raise = [](double record) {
    return std::clamp(kSpikeTailMargin * record, 1.0, kMaxRecordRaise);
  };
  const double cusum_raise = raise(cusum_record_);
  const double ewma_raise = raise(ewma_record_);
  const double spike_raise = raise(spike_record_);
  if (cusum_raise == 1.0 && ewma_raise == 1.0 && spike_raise == 1.0) return false;
  Thresholds covered = thresholds_;
  covered.cusum_h *= cusum_raise;
  covered.ewma_l *= ewma_raise;
  covered.spike_limit *= spike_raise;
  Arm(covered);
  return true;
}

void ResidualMonitor::ResetCharts() {
  cusum_.Reset();
  ewma_.Reset();
  record_upper_ = 0.0;
  record_lower_ = 0.0;
}

double ResidualMonitor::cusum_inflation() const {
  // Before the measured factor is trustworthy, fall back to the AR(1) factor.
  if (spread_cusum_.count() < kInflationSamples) {
    if (largest_until_measured_) return kMaxInflation;
    return CusumAutocorrelationFactor(autocorrelation_.value());
  }
  return std::clamp(spread_cusum_.stddev() / IndependentSpread(kCusumSpreadLambda), 1.0,
                    kMaxInflation);
}

double ResidualMonitor::ewma_inflation() const {
  if (spread_ewma_.count() < kInflationSamples) {
    if (largest_until_measured_) return kMaxInflation;
    return EwmaAutocorrelationFactor(ewma_lambda_for_spread_, autocorrelation_.value());
  }
  return std::clamp(spread_ewma_.stddev() / IndependentSpread(ewma_lambda_for_spread_), 1.0,
                    kMaxInflation);
}

ResidualReading ResidualMonitor::Observe(double residual, bool learn) {
  ResidualReading reading;
  reading.z = residual / scale_.sigma();
  if (learn) {
    // z is meaningless until the scale has settled; clipping keeps one wild residual
    // from dominating the correlation estimate.
    if (scale_.settled()) {
      const double clipped = std::clamp(reading.z, -kAutocorrelationClip, kAutocorrelationClip);
      autocorrelation_.Add(clipped);
      smoothed_cusum_ += kCusumSpreadLambda * (clipped - smoothed_cusum_);
      smoothed_ewma_ += ewma_lambda_for_spread_ * (clipped - smoothed_ewma_);
      spread_cusum_.Add(smoothed_cusum_);
      spread_ewma_.Add(smoothed_ewma_);
      if (tail_window_open_ && !armed_)
        learning_tail_ = std::max(learning_tail_, std::abs(reading.z));
    }
    scale_.Update(residual);
  }
  if (!armed_) return reading;

  double cusum_input = reading.z;
  double ewma_input = reading.z;
  if (options_.correct_autocorrelation) {
    cusum_input /= cusum_inflation();
    ewma_input /= ewma_inflation();
  }
  const auto cusum = cusum_.Add(cusum_input);
  ewma_.Add(ewma_input);
  if (learn) {
    const double k = thresholds_.cusum_k;
    record_upper_ = std::max(0.0, record_upper_ + cusum_input - k);
    record_lower_ = std::max(0.0, record_lower_ - cusum_input - k);
    cusum_record_ =
        std::max(cusum_record_, std::max(record_upper_, record_lower_) / thresholds_.cusum_h);
    ewma_record_ = std::max(ewma_record_, ewma_.ratio());
    spike_record_ = std::max(spike_record_, std::abs(reading.z) / thresholds_.spike_limit);
  }

  reading.ratio = cusum_.ratio();
  reading.detector = Detector::kCusum;
  reading.statistic = std::max(cusum.upper, cusum.lower);
  reading.threshold = thresholds_.cusum_h;
  reading.run_length = cusum.upper >= cusum.lower ? cusum.upper_run : cusum.lower_run;

  if (const double r = ewma_.ratio(); r > reading.ratio) {
    reading.ratio = r;
    reading.detector = Detector::kEwma;
    reading.statistic = ewma_.statistic();
    reading.threshold = ewma_.half_width();
    reading.run_length = 0;
  }
  if (const double r = std::abs(reading.z) / thresholds_.spike_limit; r > reading.ratio) {
    reading.ratio = r;
    reading.detector = Detector::kSpike;
    reading.statistic = reading.z;
    reading.threshold = thresholds_.spike_limit;
    reading.run_length = 0;
  }
  return reading;
}

}  // namespace nightjar::core
