// Threshold sweep: re-runs the anomaly charts and alarm of every channel on a
// ResidualCache (residual_cache.h) for a grid of threshold settings and picks one per
// channel. The rules are written down in replay_data/FORMAT.md, section "Tuning".
//
// What a candidate setting re-runs. For each cached sample, in order, exactly what
// ChannelPipeline::Process does between the forecast and the model update, with
// lib/core's own parts: core::ResidualMonitor (scale, autocorrelation correction, CUSUM,
// EWMA and spike charts), core::ThresholdDesigner (the thresholds from the false-alarm
// budget at the cached sample period, at the cached arming sample) and core::Alarm (on-
// delay, deadband, off-delay; charts reset on a clear). The pipeline's learning gate
// (a sample is trusted unless the alarm is active outside the re-sync hold or it is flat;
// the scale learns from it unless it is beyond 6 sigma once settled) and its closed-loop
// bookkeeping (suspect beyond 4 sigma or in alarm, re-sync after 300 steps) are followed
// with the candidate's own alarm state. No LSTM runs.
//
// The approximation. The residuals are those of the base run. In the engine the charts
// feed back into the model: while a channel is in alarm or a sample is suspect the model
// runs closed loop (fed its own damped forecast, learning nothing) and re-syncs after 300
// steps. A candidate whose alarm is active at other times than the base's would have
// fed the model differently, and from then on its residuals would differ from the cached
// ones. The sweep ignores that: it is exact for the base setting (the re-evaluation
// gives the base replay's anomaly raises at the same times, tested in
// tests/replay/threshold_sweep_test.cc) and for every candidate up to its first alarm
// episode that differs from the base's; after that, it is the charts of a candidate fed
// the base model's residuals. In practice the difference is confined to the samples
// during and right after alarm episodes (the model learns nothing while in alarm either
// way; it only resumes learning a little earlier or later).
//
// Channels armed from a checkpoint (ChannelResidualCache::armed_at_start, `tune
// --state-in`). The loaded residual scale and inflation estimates are not in the cache, so
// each candidate first learns them in one unarmed pass over the channel's cached samples
// (through the pipeline's learning gate: flat samples and, once the scale is settled,
// residuals beyond 6 sigma are not learnt),
// is armed with its own thresholds (designed at the loaded sample period) and then re-runs
// from the first sample as above. This is a second approximation, also for the configured
// setting: the scale is the recording's own rather than the checkpoint's, so tune on a
// recording that is normal throughout (an anomaly-free run) when using --state-in.
//
// Cost. Settings re-run in lockstep over the samples (EvaluateSettings), and settings that
// differ only in the on-delay share one ResidualMonitor until their alarms first disagree
// (then each continues with a copy), both exact. Measured on the demo day, one core: the
// 108-setting sweep costs about 0.58 of the replay it re-uses (tests/bench/sweep_bench.cc),
// so `nightjar tune` is about 1.6 replays, not yet the 1.2 asked for; the next step is to
// share the residual scale and inflation learning between all settings with the same
// ewma_lambda while their learning gates agree (most samples), which needs a charts-only
// entry point in ResidualMonitor.
//
// Thread-safety: RunSweep uses its arguments only and runs jobs threads of its own, each
// with its own ThresholdDesigner; the cache is only read. Ownership: plain values.
#pragma once

#include <cstdint>
#include <optional>
#include <span>
#include <string>
#include <vector>

#include "core/engine_options.h"
#include "core/threshold_design.h"
#include "core/time.h"
#include "replay/event_scoring.h"
#include "replay/labels.h"
#include "replay/residual_cache.h"

namespace nightjar::replay {

// The four keys a sweep varies; every other threshold and alarm key keeps the channel's
// configured value.
struct SweepSetting {
  double false_alarms_per_day = 0.5;  // thresholds.false_alarms_per_day
  double cusum_k = 0.5;               // thresholds.cusum_k
  double ewma_lambda = 0.1;           // thresholds.ewma_lambda
  double on_delay_s = 0.0;            // anomaly_alarm.on_delay_s

  bool operator==(const SweepSetting&) const = default;
};

// The channel's configured setting.
SweepSetting SettingOf(const core::ChannelOptions& options);
// `options` with the four keys of `setting`.
core::ChannelOptions WithSetting(core::ChannelOptions options, const SweepSetting& setting);
// "false_alarms_per_day 0.5, cusum_k 0.5, ewma_lambda 0.1, on_delay_s 0".
std::string DescribeSetting(const SweepSetting& setting);

// The default grid, 108 settings, in this order (the last key varies fastest):
// false_alarms_per_day {0.1, 0.5, 2, 8} x cusum_k {0.25, 0.5, 1} x ewma_lambda
// {0.05, 0.1, 0.2} x on_delay_s {0, 10, 30}. It holds the built-in default setting.
std::vector<SweepSetting> DefaultSweepGrid();

// True when `a` is more sensitive than `b`: a larger false-alarm budget, then a shorter
// on-delay; settings equal in both are ordered by `a_index < b_index` (their grid
// position), since cusum_k and ewma_lambda trade sensitivity to small shifts against
// large ones and have no order of their own.
bool MoreSensitive(const SweepSetting& a, std::size_t a_index, const SweepSetting& b,
                   std::size_t b_index);

// Re-runs one channel's charts and anomaly alarm on its cached residuals with `setting`
// and returns the anomaly raise times. InvalidArgument (naming the key) when the setting
// does not give valid thresholds for the channel.
core::Result<std::vector<core::TimestampUs>> EvaluateSetting(const ChannelResidualCache& channel,
                                                             const SweepSetting& setting,
                                                             core::ThresholdDesigner& designer);

// The same for several settings at once, in lockstep over the samples (faster than one at
// a time); one result per setting, in order.
std::vector<core::Result<std::vector<core::TimestampUs>>> EvaluateSettings(
    const ChannelResidualCache& channel, std::span<const SweepSetting> settings,
    core::ThresholdDesigner& designer);

// Anomaly raises per day allowed by default for a whole recording, from operator-load
// guidance: ANSI/ISA-18.2 Table 5 (references.md, from memory) calls about 150 annunciated
// alarms per operating position per day "very likely acceptable". A recording is taken
// as one operating position; its budget is shared equally by its channels.
inline constexpr double kDefaultMaxAlarmsPerDay = 150.0;

struct SweepOptions {
  // The candidates; the base (configured) setting of each channel is added first when it
  // is not in the grid. Empty: DefaultSweepGrid().
  std::vector<SweepSetting> grid;
  // Labelled windows; when set, settings are chosen for event F1, else for alarm rate.
  std::optional<std::vector<LabelWindow>> labels;
  ScoringOptions scoring;
  // Anomaly raises per day allowed for the whole recording, shared equally by its
  // channels (without labels). Must be > 0.
  double max_alarms_per_day = kDefaultMaxAlarmsPerDay;
  int jobs = 1;  // threads; < 1 counts as 1
};

struct ChannelChoice {
  std::string channel;
  SweepSetting base;
  SweepSetting chosen;
  double base_raises_per_day = 0.0;  // anomaly raises per day of this channel
  double chosen_raises_per_day = 0.0;
  double base_f1 = 0.0;  // this channel's own event F1 (with labels)
  double chosen_f1 = 0.0;
  bool within_budget = true;  // without labels: false when no setting met the budget
  std::string reason;         // one line: why this setting won
};

struct SweepResult {
  std::vector<ChannelChoice> channels;  // in cache order
  bool labelled = false;
  double base_overall_f1 = 0.0;  // all channels pooled (with labels)
  double chosen_overall_f1 = 0.0;
  double per_channel_budget = 0.0;  // raises per day (without labels)
  std::int64_t evaluations = 0;     // (channel, setting) re-runs
  std::size_t settings = 0;         // grid size, base settings included
};

core::Result<SweepResult> RunSweep(const ResidualCache& cache, const SweepOptions& options);

}  // namespace nightjar::replay
