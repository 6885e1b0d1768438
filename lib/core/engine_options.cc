#include "core/engine_options.h"

#include <algorithm>
#include <cmath>
#include <string>

namespace nightjar::core {

namespace {

Status Invalid(const std::string& key, const std::string& rule) {
  return Status::InvalidArgument(key + ": " + rule);
}

bool InUnitInterval(double x) { return x > 0.0 && x <= 1.0; }

Status ValidateTiming(const AlarmTiming& timing, const std::string& prefix) {
  if (Status s = ValidateAlarmTiming(timing); !s.ok()) {
    return Status::InvalidArgument(prefix + "." + s.message());
  }
  return Status::Ok();
}

}  // namespace

const char* ForecasterName(Forecaster forecaster) {
  return forecaster == Forecaster::kLstm ? "lstm" : "last_value";
}

int PredictorInputCount(const ChannelOptions& options, std::size_t context_channels) {
  const int own = options.time_of_day_features ? 4 : 2;
  return own + static_cast<int>(std::min(context_channels, std::size_t{kMaxContextChannels}));
}

int MaxPredictorInputCount(const ChannelOptions& options) {
  const int slots = options.context.from_asset ? std::max(options.context.max_channels, 0) : 0;
  return PredictorInputCount(options, static_cast<std::size_t>(slots));
}

Status ValidateChannelOptions(const ChannelOptions& options) {
  if (!(options.episode_window_s >= 0.0 && options.episode_window_s <= 86400.0)) {
    return Invalid("episode_window_s", "must be in [0, 86400] s");
  }
  if (!(options.sample_period_s >= 0.0) || !std::isfinite(options.sample_period_s)) {
    return Invalid("sample_period_s", "must be >= 0 s (0 = estimate)");
  }
  if (options.scaler.warmup_samples < 2) {
    return Invalid("scaler.warmup_samples", "must be >= 2");
  }
  if (options.warmup_samples < options.scaler.warmup_samples) {
    return Invalid("warmup_samples", "must be >= scaler.warmup_samples (" +
                                         std::to_string(options.scaler.warmup_samples) + ")");
  }
  if (!(options.level.baseline_alpha > 0.0 && options.level.baseline_alpha <= 1.0)) {
    return Invalid("level.baseline_alpha", "must be in (0, 1]");
  }
  if (!(options.level.false_alarms_per_day > 0.0) ||
      !std::isfinite(options.level.false_alarms_per_day)) {
    return Invalid("level.false_alarms_per_day", "must be > 0 (alerts per day)");
  }
  if (options.resume.hold_samples < 0) return Invalid("resume.hold_samples", "must be >= 0");
  if (!(options.resume.relearn_beyond_sd > 0.0) ||
      !std::isfinite(options.resume.relearn_beyond_sd)) {
    return Invalid("resume.relearn_beyond_sd", "must be > 0 (standard deviations)");
  }
  if (!(options.resume.relearn_after_s >= 0.0) || !std::isfinite(options.resume.relearn_after_s)) {
    return Invalid("resume.relearn_after_s", "must be >= 0 (seconds)");
  }
  if (options.resume.relearn_samples < 2) return Invalid("resume.relearn_samples", "must be >= 2");
  if (!(options.scaler.adapt_alpha >= 0.0 && options.scaler.adapt_alpha < 1.0)) {
    return Invalid("scaler.adapt_alpha", "must be in [0, 1)");
  }
  if (!(options.scaler.min_scale >= 0.0)) return Invalid("scaler.min_scale", "must be >= 0");

  if (options.context.max_channels < 0 || options.context.max_channels > kMaxContextChannels) {
    return Invalid("context.max_channels",
                   "must be in [0, " + std::to_string(kMaxContextChannels) + "]");
  }
  LstmPredictorOptions predictor = options.predictor;
  predictor.input_size = MaxPredictorInputCount(options);
  if (Status p = LstmPredictor::Validate(predictor); !p.ok()) {
    std::string message = p.message();
    if (message.rfind("lstm.", 0) == 0) message.erase(0, 5);
    return Status::InvalidArgument("predictor." + message);
  }

  const ResidualMonitorOptions& r = options.residual;
  if (!InUnitInterval(r.scale_alpha)) return Invalid("residual.scale_alpha", "must be in (0, 1]");
  if (!(r.scale_floor > 0.0)) return Invalid("residual.scale_floor", "must be > 0");
  if (!(r.scale_clip >= 1.0)) return Invalid("residual.scale_clip", "must be >= 1 sigma");
  if (!InUnitInterval(r.autocorrelation_alpha)) {
    return Invalid("residual.autocorrelation_alpha", "must be in (0, 1]");
  }
  if (!(r.cusum_cap >= 1.0)) return Invalid("residual.cusum_cap", "must be >= 1 (times h)");

  if (Status s = ValidateThresholdOptions(options.thresholds); !s.ok()) return s;

  if (Status s = ValidateSensorHealthOptions(options.sensor); !s.ok()) {
    return Status::InvalidArgument("sensor." + s.message());
  }
  if (!(options.sensor.gap_periods > 1.0)) {
    return Invalid("sensor.gap_periods", "must be > 1 sample period");
  }
  if (Status t = ValidateTiming(options.anomaly_alarm, "anomaly_alarm"); !t.ok()) return t;
  for (std::size_t i = 0; i < options.events.size(); ++i) {
    if (Status e = ValidateEventTemplate(options.events[i]); !e.ok()) {
      return Status::InvalidArgument("events[" + std::to_string(i) + "]." + e.message());
    }
  }
  return ValidateTiming(options.sensor_alarm, "sensor_alarm");
}

double BudgetShare(const ChannelOptions& options, std::size_t asset_channels) {
  if (!options.asset_shares_budget || asset_channels <= 1) return 1.0;
  return 1.0 / static_cast<double>(asset_channels);
}

ThresholdOptions SharedThresholdOptions(const ChannelOptions& options, std::size_t asset_channels) {
  ThresholdOptions shared = options.thresholds;
  shared.false_alarms_per_day *= BudgetShare(options, asset_channels);
  return shared;
}

}  // namespace nightjar::core
