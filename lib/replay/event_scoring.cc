#include "replay/event_scoring.h"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <limits>
#include <string>
#include <unordered_map>

namespace nightjar::replay {
namespace {

constexpr double kMaxGraceS = 86'400.0;
constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

core::TimestampUs GraceUs(const ScoringOptions& options) {
  assert(ValidateScoringOptions(options).ok());
  const double grace_s = std::isnan(options.grace_s) ? ScoringOptions{}.grace_s
                                                     : std::clamp(options.grace_s, 0.0, kMaxGraceS);
  return core::FromSeconds(grace_s);
}

// [start, end + grace], both inclusive.
bool FallsIn(const LabelWindow& window, core::TimestampUs t, core::TimestampUs grace_us) {
  return window.start <= t && t <= window.end + grace_us;
}

// x / y, or `if_empty` when y is 0.
double Ratio(std::int64_t x, std::int64_t y, double if_empty) {
  return y == 0 ? if_empty : static_cast<double>(x) / static_cast<double>(y);
}

double HarmonicMean(double precision, double recall) {
  const double sum = precision + recall;
  return sum > 0.0 ? 2.0 * precision * recall / sum : 0.0;
}

}  // namespace

core::Status ValidateScoringOptions(const ScoringOptions& options) {
  if (!(options.grace_s >= 0.0 && options.grace_s <= kMaxGraceS)) {
    return core::Status::InvalidArgument("grace_s: must be in [0, 86400] s, got " +
                                         std::to_string(options.grace_s));
  }
  return core::Status::Ok();
}

EventScores ScoreEvents(std::span<const Raise> raises, std::span<const LabelWindow> windows,
                        double duration_s, const ScoringOptions& options) {
  const core::TimestampUs grace_us = GraceUs(options);
  EventScores scores;
  std::vector<const LabelWindow*> anomalies;
  std::vector<const LabelWindow*> events;
  for (const LabelWindow& window : windows) {
    if (window.kind == kAnomalyWindowKind) {
      anomalies.push_back(&window);
    } else if (window.kind == kEventWindowKind) {
      events.push_back(&window);
    } else {
      ++scores.ignored_windows;
    }
  }
  scores.windows = static_cast<std::int64_t>(anomalies.size());
  scores.event_windows = static_cast<std::int64_t>(events.size());
  scores.outcomes.resize(anomalies.size());
  for (std::size_t w = 0; w < anomalies.size(); ++w) {
    scores.outcomes[w].start = anomalies[w]->start;
    scores.outcomes[w].end = anomalies[w]->end;
  }
  // Index of the earliest raise falling in each anomaly window so far.
  std::vector<const Raise*> first(anomalies.size(), nullptr);

  for (const Raise& raise : raises) {
    ++scores.raises;
    bool in_anomaly = false;
    for (std::size_t w = 0; w < anomalies.size(); ++w) {
      if (!FallsIn(*anomalies[w], raise.time, grace_us)) continue;
      in_anomaly = true;
      if (first[w] == nullptr || raise.time < first[w]->time) first[w] = &raise;
    }
    if (in_anomaly) {
      ++scores.true_raises;
      continue;
    }
    const bool in_event = std::any_of(events.begin(), events.end(), [&](const LabelWindow* e) {
      return FallsIn(*e, raise.time, grace_us);
    });
    if (in_event) {
      ++scores.expected_raises;
    } else {
      ++scores.false_alarms;
    }
  }

  double delay_sum_s = 0.0;
  for (std::size_t w = 0; w < anomalies.size(); ++w) {
    WindowOutcome& outcome = scores.outcomes[w];
    if (first[w] == nullptr) {
      outcome.delay_s = kNaN;
      continue;
    }
    outcome.detected = true;
    outcome.delay_s = core::ToSeconds(first[w]->time - anomalies[w]->start);
    outcome.first_channel = first[w]->channel;
    delay_sum_s += outcome.delay_s;
    ++scores.detected;
  }

  scores.precision = Ratio(scores.true_raises, scores.true_raises + scores.false_alarms, 1.0);
  scores.recall = Ratio(scores.detected, scores.windows, 1.0);
  scores.f1 = HarmonicMean(scores.precision, scores.recall);
  scores.false_alarms_per_day = duration_s > 0.0 ? static_cast<double>(scores.false_alarms) /
                                                       (duration_s / core::kSecondsPerDay)
                                                 : kNaN;
  scores.mean_delay_s =
      scores.detected > 0 ? delay_sum_s / static_cast<double>(scores.detected) : kNaN;
  return scores;
}

EventScoreTable ScoreEventsByChannel(std::span<const Raise> raises,
                                     std::span<const LabelWindow> windows,
                                     std::span<const std::string> channels, double duration_s,
                                     const ScoringOptions& options) {
  std::vector<std::string> names(channels.begin(), channels.end());
  std::unordered_map<std::string, std::size_t> index;
  for (std::size_t i = 0; i < names.size(); ++i) index.emplace(names[i], i);
  std::vector<std::vector<Raise>> per_channel(names.size());
  for (const Raise& raise : raises) {
    auto [it, inserted] = index.emplace(raise.channel, names.size());
    if (inserted) {
      names.push_back(raise.channel);
      per_channel.emplace_back();
    }
    per_channel[it->second].push_back(raise);
  }
  EventScoreTable table;
  table.channels.reserve(names.size());
  for (std::size_t i = 0; i < names.size(); ++i) {
    table.channels.push_back({names[i], ScoreEvents(per_channel[i], windows, duration_s, options)});
  }
  std::vector<Raise> annunciated;
  annunciated.reserve(raises.size());
  for (const Raise& raise : raises) {
    if (raise.annunciated) annunciated.push_back(raise);
  }
  table.overall = ScoreEvents(annunciated, windows, duration_s, options);
  return table;
}

double PointScores::precision() const { return Ratio(true_positives, flagged, 1.0); }
double PointScores::recall() const { return Ratio(true_positives, positives, 1.0); }
double PointScores::f1() const { return HarmonicMean(precision(), recall()); }

PointScores& PointScores::operator+=(const PointScores& other) {
  samples += other.samples;
  excluded += other.excluded;
  positives += other.positives;
  flagged += other.flagged;
  true_positives += other.true_positives;
  return *this;
}

core::Result<PointScores> ScorePoints(std::span<const core::TimestampUs> times,
                                      const std::vector<bool>& flagged,
                                      std::span<const LabelWindow> windows,
                                      const ScoringOptions& options) {
  if (times.size() != flagged.size()) {
    return core::Status::InvalidArgument("ScorePoints: " + std::to_string(times.size()) +
                                         " times but " + std::to_string(flagged.size()) + " flags");
  }
  const core::TimestampUs grace_us = GraceUs(options);
  PointScores scores;
  for (std::size_t i = 0; i < times.size(); ++i) {
    const core::TimestampUs t = times[i];
    ++scores.samples;
    bool positive = false;
    bool in_event = false;
    for (const LabelWindow& window : windows) {
      if (window.kind == kAnomalyWindowKind && window.Contains(t)) positive = true;
      if (window.kind == kEventWindowKind && FallsIn(window, t, grace_us)) in_event = true;
    }
    if (!positive && in_event) {
      ++scores.excluded;
      continue;
    }
    scores.positives += positive ? 1 : 0;
    scores.flagged += flagged[i] ? 1 : 0;
    scores.true_positives += positive && flagged[i] ? 1 : 0;
  }
  return scores;
}

}  // namespace nightjar::replay
