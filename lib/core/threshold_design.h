// ThresholdDesigner: turns a false-alarm budget into chart thresholds for one channel.
//
// Operators think in nuisance alarms per day, charts in in-control average run
// length (ARL0, in samples). At 1 Hz a textbook ARL0 of 465 samples is one false alert
// every 8 minutes per tag; a budget of one a day needs ARL0 near 1e5..1e6
// (references.md §7.3). The budget is split equally between the three residual
// charts (CUSUM, EWMA, spike), each designed for ARL0 = 3 * samples_per_day / budget by
// the Markov-chain ARL of core/arl_design.h. Designs are cached: a site with
// thousands of channels at the same rate solves each design once.
// Thread-safety: none; one per engine (worker).
#pragma once

#include <map>
#include <tuple>

#include "core/status.h"

namespace nightjar::core {

struct ThresholdOptions {
  // Budget of false anomaly alerts per channel per day on in-control data. Used for any
  // threshold below left at 0. Default 0.5.
  double false_alarms_per_day = 0.5;
  // CUSUM reference value k, in residual sigmas (detects shifts near 2k fastest). Default 0.5.
  double cusum_k = 0.5;
  // CUSUM decision interval h, in residual sigmas; 0 derives it from the budget. Default 0.
  double cusum_h = 0.0;
  // EWMA smoothing weight lambda, 0 < lambda <= 1. Default 0.1.
  double ewma_lambda = 0.1;
  // EWMA limit multiplier L (limits at +-L sigma_z); 0 derives it from the budget. Default 0.
  double ewma_l = 0.0;
  // Individual-residual limit in sigmas for spikes; 0 derives it from the budget. Default 0.
  double spike_limit = 0.0;
};

struct Thresholds {
  double cusum_k = 0.5;
  double cusum_h = 0.0;
  double ewma_lambda = 0.1;
  double ewma_l = 0.0;
  double spike_limit = 0.0;
  double arl0_per_chart = 0.0;  // design ARL0 in samples (0 when all were given explicitly)
};

// Checks ranges; the message names the offending key (e.g. "thresholds.cusum_k").
Status ValidateThresholdOptions(const ThresholdOptions& options);

// z such that P(|Z| > z) = tail for Z ~ N(0, 1); tail in (0, 1).
double NormalTwoSidedQuantile(double tail);

class ThresholdDesigner {
 public:
  Result<Thresholds> Design(const ThresholdOptions& options, double sample_period_s);

 private:
  // Keyed by (k, lambda, rounded log10 ARL0): designs within 0.1 % ARL0 are shared.
  std::map<std::tuple<double, double, long>, Thresholds> cache_;
};

}  // namespace nightjar::core
