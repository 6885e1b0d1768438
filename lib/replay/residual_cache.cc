#include "replay/residual_cache.h"

#include <functional>
#include <map>
#include <string>
#include <utility>
#include <vector>

#include "core/alarm_episodes.h"
#include "core/residual_tap.h"

namespace nightjar::replay {

namespace {

class Recorder final : public core::ResidualTap {
 public:
  explicit Recorder(std::vector<ChannelResidualCache>& channels) : channels_(channels) {}

  void OnResidual(const core::ResidualTapPoint& point) override {
    if (point.channel >= channels_.size()) channels_.resize(point.channel + 1);
    ChannelResidualCache& channel = channels_[point.channel];
    std::uint8_t flags = 0;
    if (point.flatline) flags |= kCachedFlatline;
    if (point.tail_window_started) flags |= kCachedTailWindow;
    if (point.alarm_held) flags |= kCachedAlarmHeld;
    if (point.charts_reset) flags |= kCachedChartsReset;
    if (point.relearned) channel.relearned = true;
    if (point.armed) {
      flags |= kCachedArmed;
      channel.armed_period_s = point.sample_period_s;
    }
    channel.times.push_back(point.time);
    channel.residuals.push_back(point.residual);
    channel.flags.push_back(flags);
    channel.level_ratios.push_back(point.level_ratio);
  }

  void OnRelearn(std::uint32_t channel) override {
    if (channel >= channels_.size()) channels_.resize(channel + 1);
    channels_[channel].relearned = true;
  }

 private:
  std::vector<ChannelResidualCache>& channels_;
};

}  // namespace

core::Result<ResidualCache> BuildResidualCache(const std::string& path,
                                               const ReplayOptions& options) {
  ResidualCache cache;
  cache.input = path;
  Recorder recorder(cache.channels);
  ReplayOptions tapped = options;
  tapped.residual_tap = &recorder;
  // Channels armed before the first row: loaded from a checkpoint.
  std::vector<std::pair<bool, double>> armed_at_start;
  tapped.on_engine_ready = [&armed_at_start, &options, &recorder](core::Engine& engine) {
    if (options.on_engine_ready) {
      if (core::Status ready = options.on_engine_ready(engine); !ready.ok()) return ready;
      // Engine::LoadChannel replaces a channel's pipeline and the new one has no tap: set
      // it again for every channel.
      engine.set_residual_tap(&recorder);
    }
    armed_at_start.resize(engine.channel_count());
    for (core::ChannelId id = 0; id < engine.channel_count(); ++id) {
      const core::ChannelStatus status = engine.channel_status(id);
      armed_at_start[id] = {status.state != core::ChannelState::kLearning, status.sample_period_s};
    }
    return core::Status::Ok();
  };
  std::vector<std::pair<std::string, core::TimestampUs>> anomaly_raises;
  ReplayCallbacks callbacks;
  callbacks.on_alert = [&](const core::Alert& alert) {
    if (alert.phase != core::AlertPhase::kRaise) return core::Status::Ok();
    if (alert.kind == core::AlertKind::kAnomaly) {
      anomaly_raises.emplace_back(alert.channel, alert.time);
    } else if (alert.kind == core::AlertKind::kSensor) {
      cache.fixed_raises.push_back({alert.time, alert.channel});
    }
    return core::Status::Ok();
  };
  ReplayOutcome outcome = RunReplay(path, tapped, callbacks);
  if (!outcome.status.ok()) return outcome.status;

  cache.channels.resize(outcome.summary.channels.size());
  for (std::size_t i = 0; i < cache.channels.size(); ++i) {
    ChannelResidualCache& channel = cache.channels[i];
    channel.name = outcome.summary.channels[i].name;
    channel.options = options.resolver ? options.resolver(channel.name) : options.engine.defaults;
    if (i < armed_at_start.size() && armed_at_start[i].first) {
      channel.armed_at_start = true;
      channel.armed_period_s = armed_at_start[i].second;
    }
    for (const auto& [name, time] : anomaly_raises) {
      if (name == channel.name) channel.base_anomaly_raises.push_back(time);
    }
  }
  // The recording's channels are all known when any arms, so each designed its charts for
  // its share over the recording's channels of its asset (core::BudgetShare).
  std::map<std::string, std::size_t, std::less<>> asset_sizes;
  std::vector<std::string> asset_of(cache.channels.size());
  for (std::size_t i = 0; i < cache.channels.size(); ++i) {
    asset_of[i] = core::AssetOfChannel(cache.channels[i].name, cache.channels[i].options.asset);
    if (!asset_of[i].empty()) ++asset_sizes[asset_of[i]];
  }
  for (std::size_t i = 0; i < cache.channels.size(); ++i) {
    if (!asset_of[i].empty()) cache.channels[i].asset_channels = asset_sizes[asset_of[i]];
  }
  cache.duration_s = outcome.summary.duration_s();
  cache.summary = std::move(outcome.summary);
  return cache;
}

}  // namespace nightjar::replay
