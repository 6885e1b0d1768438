// What a replay found, and how it reads against alarm-management guidance and labels.
//
// ReplaySummary is filled by RunReplay (replay_runner.h): counts per channel and per
// recording, every raise in time order, and timing. The functions here turn it into:
//  * AlarmRate: raises per hour set against the operator-load guidance below, the worst
//    10-minute window, and alarm floods;
//  * LabelScores: the anomaly alarm raises scored against a labels file (labels.h) by
//    the project's scoring rule (event_scoring.h): detected windows and delays,
//    precision, recall, false alarms per day, per channel and overall; sensor alarm
//    raises (data quality: gap, flatline, range, not finite) scored apart by the same
//    rule, since the baselines have no such checks;
//  * summary.json (ReportToJson) and the table `nightjar replay` prints (FormatReportText).
//
// Operator-load guidance used (per operator position; see ../shared/references/
// references.md §7): about 6 annunciated alarms per hour (1 per 10 minutes) is "very
// likely acceptable" and about 12 per hour "maximum manageable" (ANSI/ISA-18.2 Table 5,
// from memory, §7.2; EEMUA 191 KPI of 1 per 10 minutes, §7.1); an alarm flood is more
// than 10 alarms in 10 minutes (ISA-18.2 definition as quoted in §7.1), and fewer than
// about 1 % of 10-minute periods should be floods (§7.2, from memory). Every raise of
// kind anomaly or sensor counts as an annunciated alarm; event alerts (an expected
// pattern recognised) are notices, not alarms, and clears do not count.
//
// Thread-safety: plain values and pure functions. Ownership: plain values.
#pragma once

#include <array>
#include <cstddef>
#include <cstdint>
#include <optional>
#include <span>
#include <string>
#include <vector>

#include "core/alert.h"
#include "core/channel_pipeline.h"
#include "core/status.h"
#include "core/time.h"
#include "replay/event_scoring.h"
#include "replay/labels.h"

namespace nightjar::replay {

inline constexpr std::size_t kAlertKindCount = 3;   // values of core::AlertKind
inline constexpr std::size_t kAlertPhaseCount = 2;  // values of core::AlertPhase
inline constexpr std::size_t kDetectorCount = 9;    // values of core::Detector

// Operator-load guidance, see the top of this file.
inline constexpr double kAcceptableAlarmsPerHour = 6.0;
inline constexpr double kManageableAlarmsPerHour = 12.0;
inline constexpr core::TimestampUs kFloodWindowUs = 600 * core::kMicrosPerSecond;
inline constexpr std::int64_t kFloodAlarms = 10;  // more than this in one window is a flood
inline constexpr double kFloodPeriodsTargetPercent = 1.0;

// Alerts counted by kind and phase, and raises by detector.
struct AlertCounts {
  std::array<std::array<std::int64_t, kAlertPhaseCount>, kAlertKindCount> by_kind{};
  std::array<std::int64_t, kDetectorCount> raises_by_detector{};

  void Add(const core::Alert& alert);
  std::int64_t Get(core::AlertKind kind, core::AlertPhase phase) const;
  std::int64_t raises() const;
  std::int64_t clears() const;
};

struct ChannelSummary {
  std::string name;
  std::int64_t samples = 0;       // non-empty cells fed to the engine
  std::int64_t rejected = 0;      // not finite or out of range: counted, not learnt from
  std::int64_t out_of_order = 0;  // repeated timestamps, dropped by the engine
  double sample_period_s = 0.0;   // the engine's estimate at the end; 0 if unknown
  // Times it resumed at an operating point it never learnt and re-learnt (ResumeOptions).
  std::int64_t relearns = 0;
  // The channels its model takes as context inputs (core::ContextOptions), in input order;
  // empty for none or while its model has not started.
  std::vector<std::string> context{};
  core::ChannelState final_state = core::ChannelState::kLearning;
  AlertCounts alerts{};
};

// One raise, for rate and label analysis.
struct RaiseRecord {
  core::TimestampUs time = 0;
  std::uint32_t channel = 0;  // index into ReplaySummary::channels
  core::AlertKind kind = core::AlertKind::kAnomaly;
  core::Detector detector = core::Detector::kCusum;
  bool annunciated = true;  // core::Alert::annunciated
};

struct ReplaySummary {
  std::string input;  // the recording's path as given
  std::uint64_t seed = 0;
  std::vector<ChannelSummary> channels;  // in column order

  std::int64_t rows = 0;                 // rows delivered by the reader
  std::int64_t skipped_rows = 0;         // bad rows left out (skip_bad_rows) or reported
  std::int64_t out_of_order_rows = 0;    // the part of skipped_rows out of time order
  std::int64_t repeated_timestamps = 0;  // rows with the previous row's time
  std::string first_skip_reason;         // reader's message for the first bad row
  std::int64_t samples = 0;              // non-empty cells fed to the engine
  std::int64_t empty_cells = 0;          // "no sample" cells
  std::int64_t rejected_samples = 0;     // not finite, out of range, or no channel
  std::int64_t out_of_order_samples = 0;
  std::optional<core::TimestampUs> first_time;  // of the first row
  std::optional<core::TimestampUs> last_time;   // of the last row

  AlertCounts alerts;               // all channels
  std::vector<RaiseRecord> raises;  // every raise, in time order
  double wall_s = 0.0;              // wall-clock time of the replay
  double cpu_s = 0.0;               // CPU time of the replaying thread (shared machines)

  // Recording time covered: last minus first row time (0 with fewer than two rows).
  double span_s() const;
  // How long the recording lasts: span_s() plus one sample period (the shortest any
  // channel settled on; none if no channel knows its period), so a day of 1 s rows lasts
  // 86 400 s, as replay_data/FORMAT.md "Scoring" counts it. 0 with no rows.
  double duration_s() const;
  // Samples per wall-clock second, and recording seconds (duration_s()) per wall-clock
  // second; 0 when the wall time is 0.
  double samples_per_s() const;
  double speedup() const;
};

enum class AlarmRateRating {
  kUnknown,     // less than a second of recording: no rate
  kAcceptable,  // <= kAcceptableAlarmsPerHour
  kManageable,  // <= kManageableAlarmsPerHour
  kOverload,    // above the maximum manageable rate
};
const char* AlarmRateRatingName(AlarmRateRating rating);

struct AlarmRate {
  std::int64_t raises = 0;
  double hours = 0.0;     // the recording's duration in hours
  double per_hour = 0.0;  // raises / hours; 0 when hours is 0
  AlarmRateRating rating = AlarmRateRating::kUnknown;
  // The 10-minute window [start, start + kFloodWindowUs) with the most raises; it starts
  // at a raise (the earliest such window). 0 raises and start 0 when there is none.
  std::int64_t worst_window_raises = 0;
  core::TimestampUs worst_window_start = 0;
  bool flood = false;  // worst_window_raises > kFloodAlarms
  // Consecutive 10-minute periods from the first row time over the duration (the last
  // one may be short), and how many of them hold more than kFloodAlarms raises.
  std::int64_t periods = 0;
  std::int64_t flood_periods = 0;
};

// `raise_times` sorted ascending, over a recording from `start` lasting `duration` (no
// rate and no periods when it is 0 or less; a rate from one second on).
AlarmRate ComputeAlarmRate(std::span<const core::TimestampUs> raise_times, core::TimestampUs start,
                           core::TimestampUs duration);
// The alarms of `summary` (raises of kind anomaly or sensor) over its duration_s().
AlarmRate ComputeAlarmRate(const ReplaySummary& summary);

// One detector's scores against the labels: a row of the score table.
struct DetectorScores {
  std::string detector;   // "nightjar", "next = last", "static ±3σ", "windowed gaussian"
  EventScoreTable table;  // its anomaly alarm raises, event-wise
  // Point-wise counts of the whole series (pointwise_scoring.h); set by ReplayToDirectory
  // for every row, absent when not computed.
  std::optional<PointScores> points;
};

// Scores against a labels file, by the project's one rule (event_scoring.h, written
// down in replay_data/FORMAT.md "Scoring"): per channel and pooled.
struct LabelScores {
  std::string path;          // the labels file
  ScoringOptions options;    // grace after each window
  double duration_s = 0.0;   // ReplaySummary::duration_s()
  std::int64_t windows = 0;  // all windows in the file, any kind
  EventScoreTable table;     // anomaly alarm raises, per channel (column order) and overall
  // nightjar's sensor alarm raises alone, pooled over channels, by the same rule: how
  // often a data-quality alarm happened to fall in an anomaly window. Not a detection
  // score; reported apart so that it is not mistaken for one.
  EventScores sensor_alarms;
  // The same rule applied to each detector run on the recording: nightjar first (the
  // same numbers as `table`), then the baselines ReplayToDirectory adds
  // (baseline_scores.h). summary.json's "detectors" and the printed rows list these.
  std::vector<DetectorScores> detectors;
};

// Scores the summary's anomaly alarm raises against `windows` (table; one detector row,
// "nightjar", without point-wise counts) and its sensor alarm raises apart
// (sensor_alarms). Event notices are neither.
LabelScores ScoreAgainstLabels(const ReplaySummary& summary, std::span<const LabelWindow> windows,
                               std::string path, const ScoringOptions& options = {});

// Everything `nightjar replay` reports about one recording.
struct ReplayReport {
  core::Status status;  // OK, or why the replay stopped early (the counts cover what ran)
  ReplaySummary summary;
  AlarmRate alarm_rate;
  std::optional<LabelScores> scores;  // only when labels were given
  // The extra baseline pass (with labels only): wall-clock and its thread's CPU seconds.
  double baselines_wall_s = 0.0;
  double baselines_cpu_s = 0.0;
};

// summary.json: the report as one pretty-printed JSON object, with a final newline.
// Everything except the "timing" member is a deterministic function of the input,
// options and seed.
std::string ReportToJson(const ReplayReport& report);

// The human-readable summary: counts per channel and kind, the alarm rate against the
// guidance, the worst 10-minute window, floods, and label scores if any.
std::string FormatReportText(const ReplayReport& report);

}  // namespace nightjar::replay
