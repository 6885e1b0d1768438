#include "replay/windowed_gaussian_baseline.h"

#include <cassert>
#include <cmath>
#include <limits>
#include <string>

namespace nightjar::replay {
namespace {

int ClampWindow(int window) { return window < 2 ? 2 : window; }
double ClampK(double k) { return std::isfinite(k) && k > 0.0 ? k : kDefaultGaussianK; }

}  // namespace

core::Status WindowedGaussianBaseline::Validate(int window, double k,
                                                const core::AlarmTiming& timing) {
  if (window < 2) {
    return core::Status::InvalidArgument(
        "window: need at least 2 samples for a standard deviation, got " + std::to_string(window));
  }
  if (!(std::isfinite(k) && k > 0.0)) {
    return core::Status::InvalidArgument("k: must be finite and > 0, got " + std::to_string(k));
  }
  return core::ValidateAlarmTiming(timing);
}

WindowedGaussianBaseline::WindowedGaussianBaseline(int window, double k, core::AlarmTiming timing)
    : window_(ClampWindow(window)), k_(ClampK(k)), timing_(timing) {
  assert(Validate(window, k, timing).ok());
}

WindowedGaussianBaseline::WindowedGaussianBaseline(const core::ChannelOptions& options)
    : WindowedGaussianBaseline(kDefaultGaussianWindow, kDefaultGaussianK,
                               LimitBaselineTiming(options)) {}

std::optional<double> WindowedGaussianBaseline::Process(std::string_view channel_name,
                                                        core::TimestampUs time, double value,
                                                        std::vector<BaselineEdge>& out) {
  auto it = channels_.find(channel_name);
  if (it == channels_.end()) {
    it = channels_.emplace(std::string(channel_name), Channel(timing_, window_)).first;
  }
  Channel& channel = it->second;
  if (!std::isfinite(value) || (channel.last_time.has_value() && time <= *channel.last_time)) {
    ++skipped_samples_;
    return std::nullopt;
  }
  channel.last_time = time;
  const std::size_t size = channel.values.size();
  std::optional<double> judged;
  if (channel.filled == size) {
    // Two passes over the window: mean, then the squared deviations (numpy's order).
    double sum = 0.0;
    for (const double x : channel.values) sum += x;
    const double mean = sum / static_cast<double>(size);
    double squares = 0.0;
    for (const double x : channel.values) squares += (x - mean) * (x - mean);
    const double sigma = std::sqrt(squares / static_cast<double>(size - 1));
    const double ratio = LimitRatio(std::abs(value - mean), k_ * sigma);
    judged = ratio;
    UpdateLimitAlarm(channel.alarm, time, it->first, value, ratio, out);
  } else {
    ++channel.filled;
  }
  channel.values[channel.next] = value;
  channel.next = (channel.next + 1) % size;
  return judged;
}

bool WindowedGaussianBaseline::active(std::string_view channel_name) const {
  auto it = channels_.find(channel_name);
  return it != channels_.end() && it->second.alarm.active();
}

}  // namespace nightjar::replay
