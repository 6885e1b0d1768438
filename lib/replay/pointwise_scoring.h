// Point-wise scoring of a whole series: each instant of the recording is one point, judged
// flagged or not against the labelled windows, as outlier-detection leaderboards (SKAB's,
// for one) score a detector. The rule is written down in replay_data/FORMAT.md, section
// "Point-wise scores of a series"; in short:
//
//  * The points of a series are its row times (each distinct time once, in order).
//  * A point is flagged while any anomaly alarm of the series is active at it, whichever
//    channel it is on: an alarm raised at t flags the points from t on; one cleared at t
//    no longer flags the point at t. Sensor alarms (gap, flatline, range, not finite) and
//    event notices are not fed in: the caller passes anomaly alarm edges only.
//  * A point is positive when its time lies in an anomaly window (window ends only, no
//    grace); excluded when not positive but in an event window or its grace (expected
//    operations, as event scoring treats them); negative otherwise.
//  * Counts go into PointScores (event_scoring.h): precision = TP / flagged, recall =
//    TP / positives, F1 = 2PR / (P + R), with event scoring's conventions for a zero
//    denominator. Series of a set pool by adding their counts (micro average).
//
// SeriesPointScorer takes the row times and alarm edges as a replay produces them, so a
// replay of any length needs O(channels) memory: a row is judged when the next row
// arrives (or at Finish), by which time every edge the row caused has been fed.
//
// Thread-safety: none; one owner thread. Ownership: copies the windows; plain values.
#pragma once

#include <cstddef>
#include <optional>
#include <span>
#include <string>
#include <string_view>
#include <unordered_set>
#include <vector>

#include "core/alert.h"
#include "core/time.h"
#include "replay/event_scoring.h"
#include "replay/labels.h"

namespace nightjar::replay {

class SeriesPointScorer {
 public:
  explicit SeriesPointScorer(std::span<const LabelWindow> windows,
                             const ScoringOptions& options = {});

  // A row of the series at `time` (times non-decreasing; a repeated time is the same
  // point). Judges the previous point first.
  void Row(core::TimestampUs time);
  // An anomaly alarm edge on `channel`. Edges caused by a row come after its Row call.
  void Edge(std::string_view channel, core::AlertPhase phase);
  // Judges the last point. Further Row calls start counting again.
  void Finish();

  // The counts so far (call Finish first for the last point to be in them).
  const PointScores& scores() const { return scores_; }

 private:
  void Judge(core::TimestampUs time);

  std::vector<LabelWindow> windows_;
  core::TimestampUs grace_us_ = 0;
  std::optional<core::TimestampUs> pending_;
  std::unordered_set<std::string> active_;
  PointScores scores_;
};

}  // namespace nightjar::replay
