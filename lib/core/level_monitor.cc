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
  const bool within =
      !charts_.scale_settled() || std::abs(departure / charts_.sigma()) < kLearnGateSigmas;
  const bool learn = trusted && !signalling_ && within;
  ResidualReading reading = charts_.Observe(departure, learn);
  if (learn) {
    ++baseline_samples_;
    const double weight =
        std::max(options_.baseline_alpha, 1.0 / static_cast<double>(baseline_samples_));
    baseline_ += weight * (value - baseline_);
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
