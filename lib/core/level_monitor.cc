#include "core/level_monitor.h"

#include <algorithm>
#include <cmath>
#include <limits>

namespace nightjar::core {

LevelMonitor::LevelMonitor(const LevelOptions& options, const ResidualMonitorOptions& residual)
    : options_(options), charts_(residual) {
  // A level that wanders in normal operation is strongly correlated (ResidualMonitor).
  charts_.AssumeLargestInflationUntilMeasured();
}

void LevelMonitor::Start(double level, std::int64_t samples) {
  baseline_ = level;
  baseline_samples_ = samples;
  started_ = true;
  ResetCharts();
}

ResidualReading LevelMonitor::Observe(double value, double unit, bool trusted) {
  const double departure = (value - baseline_) / unit;
  // Winsorised at the learning gate: charted and learnt, a far-off value weighs no more
  // than one at the gate. Not gated out: a signal with regular far-off excursions (a load
  // pulse every hour) must have them in its scale and correlation, or the chart signals at
  // each one; a spike is the residual charts' business, and a fault stops the learning
  // once the chart signals.
  const double z = departure / charts_.sigma();
  const double limit = kLearnGateSigmas * charts_.sigma();
  const double charted = charts_.scale_settled() ? std::clamp(departure, -limit, limit) : departure;
  const bool learn = trusted && !signalling_;
  ResidualReading reading = charts_.Observe(charted, learn);
  reading.z = z;
  if (learn) {
    ++baseline_samples_;
    const double weight =
        std::max(options_.baseline_alpha, 1.0 / static_cast<double>(baseline_samples_));
    baseline_ += weight * charted * unit;
  }
  signalling_ = reading.ratio >= 1.0;
  reading.detector = Detector::kLevel;
  reading.run_length = 0;
  return reading;
}

void LevelMonitor::Arm(const Thresholds& thresholds) {
  Thresholds level = thresholds;
  level.spike_limit = std::numeric_limits<double>::infinity();
  charts_.Arm(level);
}

void LevelMonitor::ResetCharts() {
  charts_.ResetCharts();
  signalling_ = false;
}

}  // namespace nightjar::core
