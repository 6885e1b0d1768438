#include "replay/baseline_scores.h"

#include <utility>

#include "replay/static_limits_baseline.h"

namespace nightjar::replay {

BaselineOutcome ScoreBaselines(const std::string& path, const ReplayOptions& options,
                               std::span<const LabelWindow> windows,
                               std::span<const std::string> channels, double duration_s,
                               const ScoringOptions& scoring) {
  ReplayOptions last_value = options;
  last_value.engine.defaults.forecaster = core::Forecaster::kLastValue;
  if (options.resolver) {
    last_value.resolver = [resolver = options.resolver](std::string_view channel) {
      core::ChannelOptions resolved = resolver(channel);
      resolved.forecaster = core::Forecaster::kLastValue;
      return resolved;
    };
  }

  StaticLimitsBaseline limits(options.engine.defaults);
  std::vector<Raise> last_value_raises;
  std::vector<BaselineEdge> edges;
  ReplayCallbacks callbacks;
  callbacks.on_alert = [&last_value_raises](const core::Alert& alert) {
    if (alert.phase == core::AlertPhase::kRaise && alert.kind != core::AlertKind::kEvent) {
      last_value_raises.push_back(Raise{alert.time, alert.channel});
    }
    return core::Status::Ok();
  };
  callbacks.on_sample = [&limits, &edges](const TracePoint& point) {
    limits.Process(point.channel_name, point.time, point.value, edges);
  };
  ReplayOutcome pass = RunReplay(path, last_value, callbacks);

  BaselineOutcome outcome;
  outcome.status = std::move(pass.status);
  outcome.rows.push_back(DetectorScores{
      std::string(kLastValueRowName),
      ScoreEventsByChannel(last_value_raises, windows, channels, duration_s, scoring)});
  outcome.rows.push_back(DetectorScores{
      limits.name(),
      ScoreEventsByChannel(RaisesOf(edges), windows, channels, duration_s, scoring)});
  return outcome;
}

}  // namespace nightjar::replay
