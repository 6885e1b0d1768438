// Options for the detection engine: a plain struct per concern, every field with its
// meaning, unit and default. The config module (lib/config) fills these from YAML;
// tests and benchmarks fill them directly.
// Thread-safety: plain values.
#pragma once

#include <cstddef>
#include <cstdint>
#include <functional>
#include <string>
#include <string_view>
#include <vector>

#include "core/alarm.h"
#include "core/alert.h"
#include "core/input_scaler.h"
#include "core/level_monitor.h"
#include "core/lstm_predictor.h"
#include "core/residual_monitor.h"
#include "core/sensor_health.h"
#include "core/status.h"
#include "core/template_matcher.h"
#include "core/threshold_design.h"

namespace nightjar::core {

// What forecasts the next value. kLastValue ("next = last") is the common-sense
// baseline every forecaster must beat; it runs the same charts and alarms, so replay
// can score the LSTM against it on equal terms.
enum class Forecaster { kLstm, kLastValue };
const char* ForecasterName(Forecaster forecaster);

// What a channel does when its stream resumes after a hole longer than the gap limit (a
// sensor gap, or nightjar not running) or on a new time line. The recurrent state restarts, and a
// plant that was stopped may come back at another operating point than the one the model learnt
// (DESIGN-NOTES §1): anomaly alarms wait while the level is compared with the learnt one.
struct ResumeOptions {
  // Samples after the resume during which anomaly alarms wait (the charts start afresh
  // after them) and the level is averaged; 0 = no wait and no level check. Default 60
  // (a minute at 1 Hz: long enough for the recurrent state to warm up, which takes a few
  // tens of samples; common practice).
  int hold_samples = 60;
  // An armed channel whose mean level over the hold lies further than this many learnt
  // standard deviations from the learnt mean has moved to an operating point it never
  // learnt: it re-learns instead of alarming on every sample. Default 5 (beyond the usual
  // 3-sigma control limits with margin; common practice).
  double relearn_beyond_sd = 5.0;
  // The level check applies only after a hole longer than this, or on a new time line: a
  // plant seldom moves to a new operating point within minutes, but a fault can start in
  // a short hole (a recorder that paused while a valve was shut) and must then raise, not
  // be learnt. Shorter holes beyond the gap limit get the wait alone. Default 3600 s (an
  // hour; judgement, common practice: a restart after an upgrade follows on, a restart
  // after a shutdown or a turnaround may not).
  double relearn_after_s = 3600.0;
  // Samples a re-learning channel learns (input scale and residual scale anew; its model
  // weights are kept) before it arms again, and at least scaler.warmup_samples. Default 512: one
  // time constant of the default residual-scale average (residual.scale_alpha = 1/512).
  int relearn_samples = 512;
  // When another channel of this one's asset re-learns at the level check of the same
  // resume, this one re-learns with it, whatever its own level: an operating point is
  // the asset's (a pump at another flow also draws another current), and a channel that
  // moved less than relearn_beyond_sd would alarm on the old model. Off for a channel
  // whose level the asset does not set (an ambient temperature). Default true.
  bool relearn_with_asset = true;
};

inline constexpr int kMaxContextChannels = 64;

// Which other channels a channel's model takes as inputs besides its own history. A fault
// often shows first as a broken relation between the tags of one asset (a flow that drops
// while its pump draws the same current): each tag's own history stays plausible and only a
// model that sees the others can tell. Measured on the open datasets, one box, context on
// against off (tests/quality/RESULTS.md): SKAB event F1 0.79 -> 0.81, point-wise F1 0.68 ->
// 0.73; Tennessee Eastman false alarms 1.8 -> 1.4 a day, point-wise F1 0.95 -> 0.97, but a
// longer mean detection delay (1710 s -> 2385 s).
struct ContextOptions {
  // The model takes each other channel of its asset (ChannelOptions::asset) as an input: how
  // far that channel moved since this one last read it, in that channel's own increments.
  // The next value is forecast when this one arrives, before the others' next values do, so
  // what context gives is a relation with a lag of a sample or more (a flow that follows its
  // pump's current, a temperature that follows a valve), not one within the same sample.
  // The change, not the level, so a slow context channel (an ambient temperature) that
  // wanders beyond what was learnt cannot bias the forecast; a silent one feeds 0; one in
  // alarm shows its own forecast, so one fault does not carry its siblings' models off what
  // they learnt. The set (in the order the engine met the channels) is fixed when the model
  // starts, once the input scaler is ready, by when the asset's channels have all reported,
  // and is kept in the channel's state; a channel that appears later, or an asset regrouped
  // by a new config, changes it only when the channel starts from scratch (a reset, or a
  // checkpoint it refuses). Default true.
  bool from_asset = true;
  // At most this many context channels (the first met). Cost grows with it: per sample, 7
  // context inputs take 1.1x (training) to 1.2x (inference) the time without, 51 take 2.0x
  // to 2.5x, and each adds about 1.7 kB to the channel's state (hidden size 32;
  // tests/bench/engine_bench.cc, BM_EngineAssetContext). Range [0, 64]; 0 = none. Default 64.
  int max_channels = kMaxContextChannels;
};

struct ChannelOptions {
  // Engineering unit shown in messages, e.g. "m3/h". Default empty.
  std::string unit;
  // The asset whose anomaly alarms this channel's are grouped with (AssetOfChannel in
  // core/alarm_episodes.h): "" derives it from the name (the part before the last dot),
  // "none" groups the channel with no other. Default "".
  std::string asset;
  // While an episode of the asset is open, a raise of another of its channels later than
  // this after the episode's latest annunciated raise is annunciated. Default 120 s: the
  // consequential alarms of one cause come within a minute or two of it; a longer window
  // hides more faults that start while a false or standing episode is open (measured on
  // the open datasets, tests/quality/RESULTS.md: 600 s, the 10-minute interval of the
  // alarm-rate guidance, lost two SKAB faults; 60-180 s lost none).
  double episode_window_s = 120.0;
  // The false-alarm budgets (thresholds.false_alarms_per_day, level.false_alarms_per_day)
  // are the asset's, shared equally among its channels (BudgetShare): an asset of fifty
  // tags raises no more false alarms by design than one tag does. An operator counts the
  // alarms of a unit, not of its tags (ISA-18.2 alarm rates are per operator); per-tag
  // budgets gave the 52-channel Tennessee Eastman plant 12 false alarms a day
  // (tests/quality/RESULTS.md). false: each channel has the whole budget. Default true.
  bool asset_shares_budget = true;
  // Nominal sample period in seconds; 0 estimates it from arrival times. Default 0.
  double sample_period_s = 0.0;
  // Samples seen before anomaly alarms arm (state "learning"), counting the scaler's own
  // warm-up. Default 1800 (30 min at 1 Hz).
  int warmup_samples = 1800;
  // Feed sin/cos of the UTC time of day to the predictor (daily load cycles). Default true.
  bool time_of_day_features = true;
  // The forecaster in front of the charts. Default kLstm.
  Forecaster forecaster = Forecaster::kLstm;
  ContextOptions context;

  InputScalerOptions scaler;
  // predictor.input_size is set by the engine (increment, level, and sin/cos of the time of day if
  // enabled).
  LstmPredictorOptions predictor;
  ResidualMonitorOptions residual;
  ThresholdOptions thresholds;
  // The departure from the learnt level, charted besides the residual (core/level_monitor.h).
  LevelOptions level;
  ResumeOptions resume;
  // Flatline check on by default: 600 identical samples (10 min at 1 Hz). A channel that
  // holds its value while learning switches the check off for itself (a setpoint, a
  // quantised or slowly sampled signal), so this rarely needs tuning.
  SensorHealthOptions sensor{.flatline_samples = 600};

  // Raise/clear timing of anomaly alarms (deadband is on statistic/threshold). The 15 s
  // on-delay is the ISA-18.2 / EEMUA starting value for flow and pressure alarms (recalled
  // from memory, ../shared/references/references.md section 7.2): a lone outlying sample
  // never raises; on a channel sampled slower than that, two outlying samples in a row
  // raise at the second.
  AlarmTiming anomaly_alarm{.on_delay_s = 15.0, .off_delay_s = 30.0, .deadband = 0.2};
  // Raise/clear timing of sensor alarms (not finite, range, flatline, gap).
  AlarmTiming sensor_alarm{.on_delay_s = 0.0, .off_delay_s = 10.0, .deadband = 0.0};
  // Expected events recognised on this channel by their shape (pump start, back-flush).
  // Each match is reported as an event alert. Default none.
  std::vector<EventTemplate> events;
  Priority event_priority = Priority::kLow;
  Priority anomaly_priority = Priority::kMedium;
  Priority sensor_priority = Priority::kLow;
};

// Features per sample the channel's model takes: its increment and level, sin and cos of the
// time of day (time_of_day_features), then one per context channel.
int PredictorInputCount(const ChannelOptions& options, std::size_t context_channels);
// The most a channel with these options can take (every context slot filled).
int MaxPredictorInputCount(const ChannelOptions& options);

// Checks every field; the message names the key path, e.g. "predictor.hidden_size".
Status ValidateChannelOptions(const ChannelOptions& options);

// The share of its false-alarm budgets a channel designs its charts for when its asset
// has `asset_channels` channels (itself included; 1 when it is grouped with no other):
// 1 / asset_channels when options.asset_shares_budget, else 1. The share is taken when
// the channel arms, over the channels its engine knows then.
double BudgetShare(const ChannelOptions& options, std::size_t asset_channels);
// options.thresholds with its false_alarms_per_day scaled by BudgetShare.
ThresholdOptions SharedThresholdOptions(const ChannelOptions& options, std::size_t asset_channels);

struct EngineOptions {
  // Options for channels that the resolver (if any) does not override.
  ChannelOptions defaults;
  // Mixed with each channel's name to seed its model: same seed, same alerts.
  std::uint64_t seed = 1;
};

// Picks a channel's options from its name (globs and overrides live in lib/config).
using ChannelOptionsResolver = std::function<ChannelOptions(std::string_view channel)>;

}  // namespace nightjar::core
