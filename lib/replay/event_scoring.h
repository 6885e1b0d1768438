// Event scoring: how well a stream of alarm raises matches the labelled windows of a
// recording, for replay and threshold tuning. The rule is written down in
// replay_data/FORMAT.md, section "Scoring"; in short:
//
//  * Windows of kind "anomaly" are scored; windows of kind "event" are expected
//    operations; windows of any other kind are ignored (counted in ignored_windows).
//  * Every window is stretched by a grace period after its end: a raise at t "falls in"
//    window w when w.start <= t <= w.end + grace (both ends inclusive).
//  * An anomaly window is detected when at least one raise falls in it; its delay is the
//    first such raise minus w.start.
//  * A raise falling in some anomaly window is a true raise. Otherwise, a raise falling in
//    some event window is an expected raise (neither hit nor false alarm, left out of
//    precision). Every other raise is a false alarm.
//  * precision = true raises / (true raises + false alarms), 1 when that is 0;
//    recall = detected windows / anomaly windows, 1 when there are none;
//    F1 = 2PR / (P + R), 0 when P + R = 0;
//    false alarms per day = false alarms / (duration_s / 86400), NaN when duration_s <= 0;
//    mean delay over the detected windows, NaN when none is detected.
//  * Per channel: one channel's raises against all windows (the labels are not per
//    channel). Overall: all channels' raises pooled, so one fault raised on three
//    channels is one detected window and three true raises.
//
// Point-wise scores (ScorePoints) judge each sample instead: a sample is positive when
// its time lies in an anomaly window (no grace), excluded when it lies only in an event
// window (or its grace), negative otherwise; it is flagged when an alarm is active at it.
//
// Thread-safety: pure functions over plain values, safe from any thread.
// Ownership: inputs are borrowed for the call; results are plain values.
#pragma once

#include <cstdint>
#include <span>
#include <string>
#include <string_view>
#include <type_traits>
#include <vector>

#include "core/alert.h"
#include "core/status.h"
#include "core/time.h"
#include "replay/labels.h"

namespace nightjar::replay {

// The window kinds scoring knows. Any other kind is ignored by scoring.
inline constexpr std::string_view kAnomalyWindowKind = "anomaly";
inline constexpr std::string_view kEventWindowKind = "event";

struct ScoringOptions {
  // Seconds after a window's end during which a raise still counts as falling in it
  // (detectors need a few samples to react; a one-sample spike is over before any chart
  // crosses). Applies to anomaly and event windows alike. Range [0, 86400]. Default 60.
  double grace_s = 60.0;
};

// OK when every field is inside its documented range; else InvalidArgument naming it.
core::Status ValidateScoringOptions(const ScoringOptions& options);

// One alarm raise, the unit event scoring counts.
struct Raise {
  core::TimestampUs time = 0;
  std::string channel;
  // False for a raise that joined an alarm episode already annunciated on its asset
  // (core/alarm_episodes.h): it counts in its channel's row, not in the overall one.
  bool annunciated = true;
};

// The raises among `edges`, in their order: any type with `time`, `channel` and a
// `phase` of type core::AlertPhase (core::Alert, replay::BaselineEdge). Alerts of kind
// core::AlertKind::kEvent (an expected pattern was recognised) are notices, not alarms,
// and are left out.
template <typename Edge>
std::vector<Raise> RaisesOf(std::span<const Edge> edges) {
  std::vector<Raise> raises;
  for (const Edge& edge : edges) {
    if constexpr (std::is_same_v<Edge, core::Alert>) {
      if (edge.kind == core::AlertKind::kEvent) continue;
    }
    if (edge.phase == core::AlertPhase::kRaise) {
      raises.push_back({edge.time, edge.channel, edge.annunciated});
    }
  }
  return raises;
}
template <typename Edge>
std::vector<Raise> RaisesOf(const std::vector<Edge>& edges) {
  return RaisesOf(std::span<const Edge>(edges));
}

// What became of one anomaly window.
struct WindowOutcome {
  core::TimestampUs start = 0;
  core::TimestampUs end = 0;
  bool detected = false;
  // First raise falling in the window minus its start, seconds (>= 0); NaN if missed.
  double delay_s = 0.0;
  // Channel of that first raise (the earliest in input order on a tie); empty if missed.
  std::string first_channel;
};

struct EventScores {
  std::int64_t windows = 0;          // anomaly windows
  std::int64_t detected = 0;         // anomaly windows with a raise in [start, end + grace]
  std::int64_t event_windows = 0;    // expected-event windows
  std::int64_t ignored_windows = 0;  // windows of any other kind
  std::int64_t raises = 0;           // all raises scored
  std::int64_t true_raises = 0;      // in some anomaly window (+ grace)
  std::int64_t expected_raises = 0;  // in no anomaly window but in some event window (+ grace)
  std::int64_t false_alarms = 0;     // all others
  double precision = 1.0;
  double recall = 1.0;
  double f1 = 1.0;
  double false_alarms_per_day = 0.0;
  double mean_delay_s = 0.0;
  // One per anomaly window, in the order of the windows given.
  std::vector<WindowOutcome> outcomes;
};

// Scores `raises` (any channels, any order) against `windows` of a recording lasting
// `duration_s` seconds. `options` must pass ValidateScoringOptions (asserted; in a
// release build a bad grace is clamped into range).
EventScores ScoreEvents(std::span<const Raise> raises, std::span<const LabelWindow> windows,
                        double duration_s, const ScoringOptions& options = {});

struct ChannelEventScores {
  std::string channel;
  EventScores scores;
};

struct EventScoreTable {
  // One row per channel: those of `channels` in their order, then channels that raised
  // but were not listed, in order of first raise.
  std::vector<ChannelEventScores> channels;
  // The annunciated raises of all channels pooled: what the operator was shown (one
  // per alarm episode of an asset, Raise::annunciated).
  EventScores overall;
};

// Per-channel scores (every raise of the channel) and overall scores (the annunciated
// raises only). `channels` lists the channels of the recording so that
// a channel that never raised still gets a row (recall 0 when there are windows).
EventScoreTable ScoreEventsByChannel(std::span<const Raise> raises,
                                     std::span<const LabelWindow> windows,
                                     std::span<const std::string> channels, double duration_s,
                                     const ScoringOptions& options = {});

// Point-wise counts; add them up across channels to pool (micro-average).
struct PointScores {
  std::int64_t samples = 0;         // all samples given
  std::int64_t excluded = 0;        // only in event windows (+ grace): not judged
  std::int64_t positives = 0;       // in an anomaly window
  std::int64_t flagged = 0;         // judged samples with an alarm active
  std::int64_t true_positives = 0;  // positive and flagged
  double precision() const;         // TP / flagged; 1 when nothing was flagged
  double recall() const;            // TP / positives; 1 when there are no positives
  double f1() const;                // 2PR / (P + R); 0 when P + R = 0
  PointScores& operator+=(const PointScores& other);
};

// Point-wise scores of one channel's samples at `times` with `flagged[i]` true when an
// alarm of the channel was active at times[i]. InvalidArgument when the sizes differ.
// `options.grace_s` widens only the event windows (their exclusion), never the positives.
core::Result<PointScores> ScorePoints(std::span<const core::TimestampUs> times,
                                      const std::vector<bool>& flagged,
                                      std::span<const LabelWindow> windows,
                                      const ScoringOptions& options = {});

// Per-sample "alarm active" flags of one channel from its edges (any type with `time` and
// a core::AlertPhase `phase`, sorted by time): a raise at t counts from the sample at t
// on, a clear at t from the sample at t on; with several alarms on the channel, a sample
// is flagged while raises outnumber clears. `times` must be sorted.
template <typename Edge>
std::vector<bool> FlagsWhileActive(std::span<const core::TimestampUs> times,
                                   std::span<const Edge> edges) {
  std::vector<bool> flags(times.size(), false);
  std::size_t next = 0;
  std::int64_t active = 0;
  for (std::size_t i = 0; i < times.size(); ++i) {
    while (next < edges.size() && edges[next].time <= times[i]) {
      active += edges[next].phase == core::AlertPhase::kRaise ? 1 : -1;
      if (active < 0) active = 0;  // a clear without its raise (e.g. cut recording)
      ++next;
    }
    flags[i] = active > 0;
  }
  return flags;
}
template <typename Edge>
std::vector<bool> FlagsWhileActive(const std::vector<core::TimestampUs>& times,
                                   const std::vector<Edge>& edges) {
  return FlagsWhileActive(std::span<const core::TimestampUs>(times), std::span<const Edge>(edges));
}

}  // namespace nightjar::replay
