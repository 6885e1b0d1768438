// Baseline score rows: the two plain detectors nightjar's scores are set against.
//
// ScoreBaselines replays a recording once more, on the calling thread, through
//  * the same engine, options and per-channel options with the forecaster forced to
//    core::Forecaster::kLastValue ("next = last": same charts, alarms and sensor checks,
//    no LSTM, so the pass is cheap), and
//  * StaticLimitsBaseline with the engine defaults' terms (static_limits_baseline.h),
//    fed every non-empty cell of the same pass,
// and scores the alarm raises of each against the labels by the one scoring rule
// (event_scoring.h; alert kind "event" is a notice and left out, as for nightjar).
//
// Thread-safety: uses only its arguments; safe on several threads at once.
// Ownership: plain values.
#pragma once

#include <span>
#include <string>
#include <vector>

#include "core/status.h"
#include "replay/event_scoring.h"
#include "replay/labels.h"
#include "replay/replay_runner.h"

namespace nightjar::replay {

// Name of nightjar's own row, and of the "next = last" row.
inline constexpr std::string_view kNightjarRowName = "nightjar";
inline constexpr std::string_view kLastValueRowName = "next = last";

struct BaselineOutcome {
  core::Status status;               // OK, or why the extra pass stopped (its rows then cover less)
  std::vector<DetectorScores> rows;  // "next = last", then the static limits
};

// `channels`: the recording's channel names in column order; `duration_s` the recording's
// duration as nightjar's row uses it, so all rows share one denominator.
BaselineOutcome ScoreBaselines(const std::string& path, const ReplayOptions& options,
                               std::span<const LabelWindow> windows,
                               std::span<const std::string> channels, double duration_s,
                               const ScoringOptions& scoring = {});

}  // namespace nightjar::replay
