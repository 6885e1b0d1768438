#include "core/sensor_health.h"

#include <cassert>
#include <cmath>
#include <string>

namespace nightjar::core {

Status ValidateSensorHealthOptions(const SensorHealthOptions& options) {
  if (std::isnan(options.min_value) || std::isnan(options.max_value) ||
      options.min_value > options.max_value) {
    return Status::InvalidArgument("min_value/max_value: need min_value <= max_value, got [" +
                                   std::to_string(options.min_value) + ", " +
                                   std::to_string(options.max_value) + "]");
  }
  if (options.flatline_samples < 0 || options.flatline_samples == 1) {
    return Status::InvalidArgument("flatline_samples: must be 0 (off) or >= 2, got " +
                                   std::to_string(options.flatline_samples));
  }
  if (!(std::isfinite(options.flatline_tolerance) && options.flatline_tolerance >= 0.0)) {
    return Status::InvalidArgument("flatline_tolerance: must be finite and >= 0, got " +
                                   std::to_string(options.flatline_tolerance));
  }
  if (!(std::isfinite(options.gap_periods) && options.gap_periods >= 0.0)) {
    return Status::InvalidArgument("gap_periods: must be finite and >= 0 (0 = off), got " +
                                   std::to_string(options.gap_periods));
  }
  return Status::Ok();
}

const char* SensorFaultName(std::uint8_t fault_bit) {
  switch (fault_bit) {
    case SensorCheck::kNotFinite:
      return "not_finite";
    case SensorCheck::kOutOfRange:
      return "out_of_range";
    case SensorCheck::kFlatline:
      return "flatline";
    default:
      return "unknown";
  }
}

SensorHealth::SensorHealth(const SensorHealthOptions& options) : options_(options) {
  assert(ValidateSensorHealthOptions(options).ok());
  // Release builds: an invalid field falls back to its default (that check off).
  const SensorHealthOptions defaults;
  if (std::isnan(options_.min_value) || std::isnan(options_.max_value) ||
      options_.min_value > options_.max_value) {
    options_.min_value = defaults.min_value;
    options_.max_value = defaults.max_value;
  }
  if (options_.flatline_samples < 2) options_.flatline_samples = 0;
  if (!(std::isfinite(options_.flatline_tolerance) && options_.flatline_tolerance >= 0.0)) {
    options_.flatline_tolerance = defaults.flatline_tolerance;
  }
  if (!(std::isfinite(options_.gap_periods) && options_.gap_periods >= 0.0)) {
    options_.gap_periods = defaults.gap_periods;
  }
}

SensorCheck SensorHealth::Check(TimestampUs t, double value) {
  if (!last_sample_time_ || t > *last_sample_time_) last_sample_time_ = t;

  SensorCheck check;
  if (!std::isfinite(value)) {
    check.faults |= SensorCheck::kNotFinite;
  } else {
    if (value < options_.min_value || value > options_.max_value) {
      check.faults |= SensorCheck::kOutOfRange;
    }
    if (run_length_ > 0 && std::fabs(value - run_first_) <= options_.flatline_tolerance) {
      ++run_length_;
    } else {
      run_first_ = value;
      run_length_ = 1;
    }
  }
  if (options_.flatline_samples > 0 && run_length_ >= options_.flatline_samples) {
    check.faults |= SensorCheck::kFlatline;
  }
  return check;
}

bool SensorHealth::GapPresent(TimestampUs now, double period_s) const {
  if (!last_sample_time_ || options_.gap_periods <= 0.0) return false;
  if (!(std::isfinite(period_s) && period_s > 0.0)) return false;
  return ToSeconds(now - *last_sample_time_) > options_.gap_periods * period_s;
}

}  // namespace nightjar::core
