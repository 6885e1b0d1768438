#include "replay/static_limits_baseline.h"

#include <cassert>
#include <cmath>
#include <cstdio>
#include <limits>
#include <string>

namespace nightjar::replay {
namespace {

constexpr double kDefaultK = 3.0;

int ClampWarmup(int warmup_samples) { return warmup_samples < 2 ? 2 : warmup_samples; }
double ClampK(double k) { return std::isfinite(k) && k > 0.0 ? k : kDefaultK; }

}  // namespace

core::Status StaticLimitsBaseline::Validate(int warmup_samples, double k,
                                            const core::AlarmTiming& timing) {
  if (warmup_samples < 2) {
    return core::Status::InvalidArgument(
        "warmup_samples: need at least 2 samples for a standard deviation, got " +
        std::to_string(warmup_samples));
  }
  if (!(std::isfinite(k) && k > 0.0)) {
    return core::Status::InvalidArgument("k: must be finite and > 0, got " + std::to_string(k));
  }
  return core::ValidateAlarmTiming(timing);
}

StaticLimitsBaseline::StaticLimitsBaseline(int warmup_samples, double k, core::AlarmTiming timing)
    : warmup_samples_(ClampWarmup(warmup_samples)), k_(ClampK(k)), timing_(timing) {
  assert(Validate(warmup_samples, k, timing).ok());
}

StaticLimitsBaseline::StaticLimitsBaseline(const core::ChannelOptions& options)
    : StaticLimitsBaseline(options.warmup_samples, kDefaultK, LimitBaselineTiming(options)) {}

core::AlarmTiming LimitBaselineTiming(const core::ChannelOptions& options) {
  core::AlarmTiming timing = options.anomaly_alarm;
  timing.on_delay_s = 0.0;
  return timing;
}

double LimitRatio(double deviation, double half_width) {
  if (half_width > 0.0) return deviation / half_width;
  return deviation > 0.0 ? std::numeric_limits<double>::infinity() : 0.0;
}

void UpdateLimitAlarm(core::Alarm& alarm, core::TimestampUs time, const std::string& channel,
                      double value, double ratio, std::vector<BaselineEdge>& out) {
  const core::AlarmEdge edge = alarm.Update(time, ratio);
  if (edge == core::AlarmEdge::kNone) return;
  out.push_back({.time = time,
                 .channel = channel,
                 .phase = edge == core::AlarmEdge::kRaise ? core::AlertPhase::kRaise
                                                          : core::AlertPhase::kClear,
                 .value = value,
                 .ratio = ratio});
}

std::string StaticLimitsBaseline::name() const {
  char k[32];
  std::snprintf(k, sizeof k, "%g", k_);
  return std::string("static \xC2\xB1") + k + "\xCF\x83";
}

void StaticLimitsBaseline::Process(std::string_view channel_name, core::TimestampUs time,
                                   double value, std::vector<BaselineEdge>& out) {
  auto it = channels_.find(channel_name);
  if (it == channels_.end()) {
    it = channels_.emplace(std::string(channel_name), Channel(timing_)).first;
  }
  Channel& channel = it->second;
  if (!std::isfinite(value) || (channel.last_time.has_value() && time <= *channel.last_time)) {
    ++skipped_samples_;
    return;
  }
  channel.last_time = time;
  if (!channel.armed) {
    channel.moments.Add(value);
    if (channel.moments.count() >= warmup_samples_) {
      channel.armed = true;
      channel.mean = channel.moments.mean();
      channel.half_width = k_ * channel.moments.stddev();
    }
    return;
  }
  const double ratio = LimitRatio(std::abs(value - channel.mean), channel.half_width);
  UpdateLimitAlarm(channel.alarm, time, it->first, value, ratio, out);
}

const StaticLimitsBaseline::Channel* StaticLimitsBaseline::Find(std::string_view channel) const {
  auto it = channels_.find(channel);
  return it == channels_.end() ? nullptr : &it->second;
}

std::optional<StaticLimits> StaticLimitsBaseline::limits(std::string_view channel_name) const {
  const Channel* channel = Find(channel_name);
  if (channel == nullptr || !channel->armed) return std::nullopt;
  return StaticLimits{.mean = channel->mean,
                      .sigma = channel->half_width / k_,
                      .lower = channel->mean - channel->half_width,
                      .upper = channel->mean + channel->half_width};
}

bool StaticLimitsBaseline::active(std::string_view channel_name) const {
  const Channel* channel = Find(channel_name);
  return channel != nullptr && channel->alarm.active();
}

}  // namespace nightjar::replay
