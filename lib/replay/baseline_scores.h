// Baseline score rows: the plain detectors nightjar's scores are set against.
//
// ScoreBaselines replays a recording once more, on the calling thread, through
//  * the same engine, options and per-channel options with the forecaster forced to
//    core::Forecaster::kLastValue ("next = last": same charts, alarms and sensor checks,
//    no LSTM, so the pass is cheap),
//  * StaticLimitsBaseline with the engine defaults' terms (static_limits_baseline.h), and
//  * WindowedGaussianBaseline with its defaults and the engine defaults' anomaly alarm
//    timing (windowed_gaussian_baseline.h),
// the last two fed every non-empty cell of the same pass, and scores each by the one
// scoring rule: event-wise (event_scoring.h) and point-wise over the series
// (pointwise_scoring.h). Only anomaly alarms are scored: the "next = last" engine's
// sensor alarms are data-quality alarms the other baselines do not have (nightjar's are
// reported apart, LabelScores::sensor_alarms), and event notices are not alarms.
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
  core::Status status;  // OK, or why the extra pass stopped (its rows then cover less)
  // "next = last", the static limits, the windowed gaussian; each with point-wise counts.
  std::vector<DetectorScores> rows;
};

// `channels`: the recording's channel names in column order; `duration_s` the recording's
// duration as nightjar's row uses it, so all rows share one denominator.
BaselineOutcome ScoreBaselines(const std::string& path, const ReplayOptions& options,
                               std::span<const LabelWindow> windows,
                               std::span<const std::string> channels, double duration_s,
                               const ScoringOptions& scoring = {});

}  // namespace nightjar::replay
