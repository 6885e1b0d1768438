#include "replay/baseline_scores.h"

#include <string_view>
#include <unordered_map>
#include <utility>

#include "core/alarm_episodes.h"
#include "replay/pointwise_scoring.h"
#include "replay/static_limits_baseline.h"
#include "replay/windowed_gaussian_baseline.h"

namespace nightjar::replay {
namespace {

// Feeds a baseline's new edges (from `from` on) to its point scorer.
void FeedEdges(const std::vector<BaselineEdge>& edges, std::size_t from,
               SeriesPointScorer& points) {
  for (std::size_t i = from; i < edges.size(); ++i) points.Edge(edges[i].channel, edges[i].phase);
}

// Groups a limit baseline's alarms into asset episodes exactly as the engine groups its
// own (same assets, same rule), so every row is scored on what an operator would be shown.
class BaselineGrouping {
 public:
  explicit BaselineGrouping(const ReplayOptions& options) : options_(options) {}

  void Group(std::vector<BaselineEdge>& edges, std::size_t from) {
    for (std::size_t i = from; i < edges.size(); ++i) {
      BaselineEdge& edge = edges[i];
      core::Alert alert;
      alert.time = edge.time;
      alert.channel = edge.channel;
      alert.kind = core::AlertKind::kAnomaly;
      alert.phase = edge.phase;
      const core::ChannelOptions options = Options(edge.channel);
      alert.priority = options.anomaly_priority;
      episodes_.Annotate(AssetOf(edge.channel), core::FromSeconds(options.episode_window_s), alert);
      edge.annunciated = alert.annunciated;
    }
  }

 private:
  core::ChannelOptions Options(std::string_view channel) const {
    return options_.resolver ? options_.resolver(channel) : options_.engine.defaults;
  }
  const std::string& AssetOf(const std::string& channel) {
    auto it = assets_.find(channel);
    if (it == assets_.end()) {
      it = assets_.emplace(channel, core::AssetOfChannel(channel, Options(channel).asset)).first;
    }
    return it->second;
  }

  const ReplayOptions& options_;
  core::AlarmEpisodes episodes_;
  std::unordered_map<std::string, std::string> assets_;
};

}  // namespace

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
  BaselineGrouping limits_grouping(options);
  BaselineGrouping gaussian_grouping(options);
  WindowedGaussianBaseline gaussian(options.engine.defaults);
  SeriesPointScorer last_value_points(windows, scoring);
  SeriesPointScorer limits_points(windows, scoring);
  SeriesPointScorer gaussian_points(windows, scoring);
  std::vector<Raise> last_value_raises;
  std::vector<BaselineEdge> limits_edges;
  std::vector<BaselineEdge> gaussian_edges;
  ReplayCallbacks callbacks;
  callbacks.on_row = [&](core::TimestampUs time) {
    last_value_points.Row(time);
    limits_points.Row(time);
    gaussian_points.Row(time);
  };
  callbacks.on_alert = [&](const core::Alert& alert) {
    if (alert.kind != core::AlertKind::kAnomaly) return core::Status::Ok();
    last_value_points.Edge(alert.channel, alert.phase);
    if (alert.phase == core::AlertPhase::kRaise) {
      last_value_raises.push_back(Raise{alert.time, alert.channel, alert.annunciated});
    }
    return core::Status::Ok();
  };
  callbacks.on_sample = [&](const TracePoint& point) {
    const std::size_t limits_from = limits_edges.size();
    limits.Process(point.channel_name, point.time, point.value, limits_edges);
    limits_grouping.Group(limits_edges, limits_from);
    FeedEdges(limits_edges, limits_from, limits_points);
    const std::size_t gaussian_from = gaussian_edges.size();
    gaussian.Process(point.channel_name, point.time, point.value, gaussian_edges);
    gaussian_grouping.Group(gaussian_edges, gaussian_from);
    FeedEdges(gaussian_edges, gaussian_from, gaussian_points);
  };
  ReplayOutcome pass = RunReplay(path, last_value, callbacks);
  last_value_points.Finish();
  limits_points.Finish();
  gaussian_points.Finish();

  BaselineOutcome outcome;
  outcome.status = std::move(pass.status);
  outcome.rows.push_back(DetectorScores{
      std::string(kLastValueRowName),
      ScoreEventsByChannel(last_value_raises, windows, channels, duration_s, scoring),
      last_value_points.scores()});
  outcome.rows.push_back(DetectorScores{
      limits.name(),
      ScoreEventsByChannel(RaisesOf(limits_edges), windows, channels, duration_s, scoring),
      limits_points.scores()});
  outcome.rows.push_back(DetectorScores{
      gaussian.name(),
      ScoreEventsByChannel(RaisesOf(gaussian_edges), windows, channels, duration_s, scoring),
      gaussian_points.scores()});
  return outcome;
}

}  // namespace nightjar::replay
