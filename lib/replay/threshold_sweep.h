// Threshold sweep: re-runs the anomaly charts and alarm of every channel on a
// ResidualCache (residual_cache.h) for a grid of threshold settings and picks one per
// channel. The rules are written down in replay_data/FORMAT.md, section "Tuning".
//
// What a candidate setting re-runs. ChannelPipeline::Process between the forecast and the
// model update, split in two, with lib/core's own parts:
//  * The learning, once per channel. The base (configured) setting runs exactly as the
//    pipeline does: core::ResidualMonitor (scale, autocorrelation and inflation learning,
//    CUSUM, EWMA and spike charts), core::ThresholdDesigner (thresholds from the budget
//    at the cached sample period, at the cached arming sample), core::Alarm (on-delay,
//    deadband, off-delay; charts reset on a clear), the pipeline's learning gate (a sample
//    is trusted unless the alarm is active outside the re-sync hold or it is flat; it is
//    learnt unless beyond 6 sigma once the scale has settled) and its closed-loop
//    bookkeeping (suspect beyond 4 sigma or in alarm, re-sync after 300 steps). Along
//    that base gate one more ResidualMonitor per distinct ewma_lambda learns the same
//    residuals; the learning depends on the setting only through the EWMA's spread
//    (lambda) and the gate. This gives, per sample, the standardised residual and the
//    CUSUM and per-lambda EWMA inputs (z over the inflation factors).
//  * The charts, per setting: its own core::CusumDetector, core::EwmaDetector and spike
//    limit, built as ResidualMonitor::Arm builds them, fed those inputs, the alarm ratio
//    as ResidualMonitor::Observe forms it, and its own core::Alarm. No LSTM runs, and no
//    learning per setting.
//
// The approximations. (1) The residuals are those of the base run. In the engine the
// charts feed back into the model: while a channel is in alarm or a sample is suspect the
// model runs closed loop (fed its own damped forecast, learning nothing) and re-syncs
// after 300 steps; a candidate whose alarm is active at other times would have fed the
// model differently and seen other residuals from then on. (2) Every setting learns its
// scale and inflation along the base setting's gate, not its own: a candidate in alarm
// where the base is not still learns from those samples, and one quiet where the base is
// in alarm does not. Both meet at the same point: the re-run of a setting is exactly
// what the pipeline's charts would do with that setting on the cached residuals up to
// the first sample at which its own gate (its alarm, its bookkeeping) differs from the
// base's; EvaluateSettings reports that sample (SettingRaises::own_gate_departs), and
// tests/replay/threshold_sweep_test.cc checks every grid setting against a re-run that
// follows its own gate (EvaluateSettingOwnGate) up to there. For the base setting it
// never departs: the re-run gives the base replay's anomaly raises at the same times
// (tested). After the departure it is the charts of the candidate on the base setting's
// learning; the model learns nothing while in alarm either way, so the difference is
// confined to how the scale and inflation track the samples in and right after alarm
// episodes.
//
// How large (2) is on the demo day (cw2_day, default config): of the 540 (channel,
// setting) re-runs, 424 give exactly the raises of the own-gate re-run, and the raise
// counts differ by 65 in 2501 in all; the confirming replay of the tuned file scores
// better than the sweep predicts (replay_data/FORMAT.md, "Tuning").
//
// Cost. Measured on the demo day, one core, as fractions of the replay that built the
// cache (tests/bench/sweep_bench.cc; a shared, loaded machine): the whole 108-setting
// sweep 0.13 to 0.16 over runs, of which the threshold designs (36 distinct) about 0.045
// and the learning pass (base setting, one lambda) about 0.02; one setting's charts under
// 0.001, against about 0.008 for a setting that learns along its own gate. `nightjar
// tune --jobs 1` costs about 1.1 replays of the same day (whole process, CPU).
//
// Memory: the learning pass keeps 8 * (2 + lambdas) + 1 bytes per cached sample of the
// channel (about 3.5 MB for a day at 1 Hz and 3 lambdas); RunSweep holds that for `jobs`
// channels at a time.
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
  double on_delay_s = 15.0;           // anomaly_alarm.on_delay_s

  bool operator==(const SweepSetting&) const = default;
};

// The channel's configured setting.
SweepSetting SettingOf(const core::ChannelOptions& options);
// `options` with the four keys of `setting`.
core::ChannelOptions WithSetting(core::ChannelOptions options, const SweepSetting& setting);
// "false_alarms_per_day 0.5, cusum_k 0.5, ewma_lambda 0.1, on_delay_s 15".
std::string DescribeSetting(const SweepSetting& setting);

// The default grid, 108 settings, in this order (the last key varies fastest):
// false_alarms_per_day {0.1, 0.5, 2, 8} x cusum_k {0.25, 0.5, 1} x ewma_lambda
// {0.05, 0.1, 0.2} x on_delay_s {0, 15, 30}. It holds the built-in default setting.
std::vector<SweepSetting> DefaultSweepGrid();

// True when `a` is more sensitive than `b`: a larger false-alarm budget, then a shorter
// on-delay; settings equal in both are ordered by `a_index < b_index` (their grid
// position), since cusum_k and ewma_lambda trade sensitivity to small shifts against
// large ones and have no order of their own.
bool MoreSensitive(const SweepSetting& a, std::size_t a_index, const SweepSetting& b,
                   std::size_t b_index);

// Re-runs one channel's charts and anomaly alarm on its cached residuals with `setting`
// (on the base setting's learning, see above) and returns the anomaly raise times.
// InvalidArgument (naming the key) when the setting does not give valid thresholds for
// the channel.
core::Result<std::vector<core::TimestampUs>> EvaluateSetting(const ChannelResidualCache& channel,
                                                             const SweepSetting& setting,
                                                             core::ThresholdDesigner& designer);

struct SettingRaises {
  std::vector<core::TimestampUs> raises;  // anomaly raises, in time order
  // The first sample at which this setting's own learning gate would differ from the
  // base setting's; up to (not including) it the raises are those of
  // EvaluateSettingOwnGate. nullopt: it never does (always so for the base setting).
  std::optional<core::TimestampUs> own_gate_departs;
};

// The same for several settings sharing one learning pass; one result per setting, in
// order. This is what RunSweep runs.
std::vector<core::Result<SettingRaises>> EvaluateSettings(const ChannelResidualCache& channel,
                                                          std::span<const SweepSetting> settings,
                                                          core::ThresholdDesigner& designer);

// Reference re-run: `setting` with a ResidualMonitor of its own that learns along the
// setting's own gate (what the sweep did before it shared the learning; about 100 times
// the cost of one setting's charts). Used by the tests to bound the shared-learning
// approximation.
core::Result<std::vector<core::TimestampUs>> EvaluateSettingOwnGate(
    const ChannelResidualCache& channel, const SweepSetting& setting,
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
