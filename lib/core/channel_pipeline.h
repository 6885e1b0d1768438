// ChannelPipeline: everything nightjar knows and does for one sensor channel.
//
// Per sample: order and health checks, input scaling, the LSTM one-step forecast,
// the residual charts, and the ISA-18.2 alarms they drive. Fixed-size state, allocated
// when the channel is created; Process() does not allocate unless it emits an alert.
// Thread-safety: none; a channel is owned and touched by one engine worker.
#pragma once

#include <array>
#include <cstddef>
#include <cstdint>
#include <optional>
#include <span>
#include <string>
#include <vector>

#include "core/alarm.h"
#include "core/alert.h"
#include "core/engine_options.h"
#include "core/input_scaler.h"
#include "core/level_monitor.h"
#include "core/lstm_predictor.h"
#include "core/residual_monitor.h"
#include "core/residual_tap.h"
#include "core/running_moments.h"
#include "core/sample_period.h"
#include "core/sensor_health.h"
#include "core/template_matcher.h"
#include "core/threshold_design.h"

namespace nightjar::core {

// Channel states as shown to operators and on the retained state topic.
enum class ChannelState {
  kLearning,  // alarms disarmed while the model learns normal behaviour
  kArmed,     // watching; no anomaly alarm active
  kInAlarm,   // an anomaly alarm is active
  kStale,     // no sample for longer than the gap limit
};
const char* ChannelStateName(ChannelState state);

// The alarms one channel owns; also the name used by acknowledge/shelve commands.
enum class AlarmCondition { kAnomaly, kNotFinite, kRange, kFlatline, kGap };
inline constexpr int kAlarmConditionCount = 5;
const char* AlarmConditionName(AlarmCondition condition);
// Parses the names above; false if unknown.
bool ParseAlarmCondition(std::string_view name, AlarmCondition* condition);

// Why a channel's stream has a hole that nightjar made, not the sensor.
enum class Discontinuity {
  kRestart,  // nightjar was not running: the channel comes from a checkpoint
  kDropped,  // samples were dropped before they reached the engine (a full queue)
};

struct ChannelStatus {
  ChannelState state = ChannelState::kLearning;
  std::int64_t samples = 0;       // samples offered, accepted or not
  std::int64_t rejected = 0;      // not finite or out of range: not fed to the model
  std::int64_t out_of_order = 0;  // duplicate or earlier timestamps, dropped
  double last_value = 0.0;
  bool accepted_once = false;  // last_value holds a sample
  // Exact repeats of a sample-and-hold signal, not charted (no new measurement).
  std::int64_t held = 0;
  double last_expected = 0.0;
  double last_z = 0.0;
  // Residual standard deviation in engineering units: expected +- 3 of these is the
  // band a report draws around the forecast.
  double last_residual_sigma = 0.0;
  double last_ratio = 0.0;                    // largest chart statistic / threshold (>= 1 signals)
  Detector last_detector = Detector::kCusum;  // the chart giving last_ratio
  double sample_period_s = 0.0;               // 0 until known
  // Times the channel resumed at an operating point it never learnt and re-learnt
  // (ResumeOptions); a count an operator should know about.
  std::int64_t relearns = 0;
  bool relearning = false;  // re-learning now (state kLearning with a learnt model)
  // In-control average run length, in samples, each residual chart's thresholds were
  // designed for (Thresholds::arl0_per_chart; 0 until armed or when all were given).
  double design_arl0 = 0.0;
};

// One context channel as another channel's model reads it (ContextOptions).
struct ContextSource {
  double value = 0.0;            // the value its own model was last fed
  double increment_scale = 1.0;  // the spread of its sample-to-sample changes
  bool valid = false;            // false until it has a value and a scale, and after a gap
};

class ChannelPipeline {
 public:
  ChannelPipeline(std::string name, const ChannelOptions& options, std::uint64_t seed);

  const std::string& name() const { return name_; }

  // Consumes one sample; appends any alerts (raise or clear) to `out`.
  void Process(TimestampUs time, double value, ThresholdDesigner& designer,
               LstmWorkspace<float>& workspace, std::vector<Alert>& out);

  // Raises the gap alarm when no sample has come for too long by `now`.
  void CheckGap(TimestampUs now, std::vector<Alert>& out);

  // The hole before the next sample is nightjar's own (see Discontinuity): that sample
  // raises no gap alarm however late it is, and restarts the sequence (recurrent state,
  // increment, template windows) when the hole is longer than the gap limit, as after a
  // gap. Until then, after kRestart the silence is measured from the first clock seen
  // after this call (a sensor that died while nightjar was down still raises its gap);
  // after kDropped no gap is raised (the silence may be nightjar's own drops).
  void NoteDiscontinuity(Discontinuity reason) {
    resume_after_ = reason;
    resume_clock_.reset();
  }

  // Channels in this one's asset, itself included (1 when grouped with no other); the
  // engine keeps it current. The charts are designed for the share of the false-alarm
  // budgets it gives (BudgetShare) when the channel arms.
  void set_asset_channels(std::size_t count) { asset_channels_ = count; }

  // Context inputs (ContextOptions). The engine fixes the set once, when the model is about
  // to start (context_due()), and before each Process hands over what those channels show
  // now, in their order (borrowed until that Process returns).
  bool context_due() const { return !context_fixed_ && scaler_.ready(); }
  void FixContext(std::vector<std::string> names);
  const std::vector<std::string>& context_names() const { return context_names_; }
  void set_context(std::span<const ContextSource> sources) { context_ = sources; }
  // What this channel shows the models whose context it is.
  ContextSource context_source() const;

  // The recording just fed was known to be normal (`nightjar learn`): arm now if the
  // residual scale has settled, even before warmup_samples; if the channel was armed
  // already, raise its chart limits to cover what they reached on the recording
  // (ResidualMonitor::CoverInControlRecord); and forget every alarm the recording raised,
  // silently (its departures were normal behaviour by definition). True when the
  // channel is armed afterwards.
  bool ConcludeKnownGood(ThresholdDesigner& designer);

  // When the resume began whose level check last made this channel re-learn (the
  // ResumeOptions check, not a sibling's); nullopt if none has. Read by the engine.
  std::optional<TimestampUs> relearnt_resume() const { return relearnt_resume_; }
  // Times the channel re-learnt at a new operating point (ChannelStatus::relearns).
  std::int64_t relearn_count() const { return counters_.relearns; }
  // A channel of this one's asset, resumed at `sibling_resume`, found at `now` that it
  // came back at an operating point it never learnt. The operating point belongs to the
  // asset, not the channel (DESIGN-NOTES §1, §4), so this channel re-learns too when it
  // follows its asset (resume.relearn_with_asset), is armed, and resumed with a level
  // check no further from `sibling_resume` than that sibling's hold lasted (`now` -
  // `sibling_resume`): the same resume. An alarm raised since is withdrawn with a clear
  // that says why. True when it re-learns.
  bool RelearnWithAsset(TimestampUs sibling_resume, TimestampUs now, std::vector<Alert>& out);

  Status Acknowledge(AlarmCondition condition, TimestampUs now);
  Status Shelve(AlarmCondition condition, TimestampUs now, TimestampUs until);
  Status Unshelve(AlarmCondition condition, TimestampUs now, std::vector<Alert>& out);
  const Alarm& alarm(AlarmCondition condition) const;

  // Reports each charted residual to `tap` (nullptr: none) as channel `id`. Borrowed.
  void set_residual_tap(ResidualTap* tap, std::uint32_t id) {
    tap_ = tap;
    tap_id_ = id;
  }

  ChannelStatus status() const;
  // Heap bytes owned by this channel (model, optimiser state, rings).
  std::size_t MemoryBytes() const;

 private:
  friend class ChannelStateAccess;  // checkpoints (channel_state.cc)
  struct Context {
    TimestampUs time;
    double value;
    double expected;
    double z;
  };

  Alarm& alarm_for(AlarmCondition condition) {
    return alarms_[static_cast<std::size_t>(condition)];
  }
  void UpdateSensorAlarm(AlarmCondition condition, bool present, const Context& context,
                         std::vector<Alert>& out);
  void UpdateAnomalyAlarm(const ResidualReading& reading, const Context& context,
                          std::vector<Alert>& out);
  void TryArm(ThresholdDesigner& designer);
  int ArmAfterSamples() const;
  // `check_level`: compare the level over the hold with the learnt one (ResumeOptions).
  void BeginResumeHold(TimestampUs time, bool check_level);
  void ContinueResumeHold(const Context& context, std::vector<Alert>& out);
  // `why` ends the message of the clear that withdraws an active anomaly alarm.
  void Relearn(const Context& context, std::string_view why, std::vector<Alert>& out);
  void RestartTimeline();  // a restored channel's stream resumes on an earlier clock

  void EmitEdge(AlarmCondition condition, AlarmEdge edge, const Context& context,
                const ResidualReading* reading, std::vector<Alert>& out);
  void MatchEvents(const Context& context, std::vector<Alert>& out);
  void FillFeatures(TimestampUs time, double increment, double level);
  // Rebuilds the (unstarted or just restored) model for context_names_.size() context inputs.
  void SizeModelForContext();
  double IncrementScale() const;
  void NoteRepeat(bool repeat);
  // A sample-and-hold signal in a regular hold: a repeat is no new measurement.
  bool HoldsItsSamples() const;

  std::string name_;
  ChannelOptions options_;
  SamplePeriod period_;
  SensorHealth health_;
  InputScaler scaler_;
  RunningMoments increment_moments_;  // spread of sample-to-sample increments
  LstmPredictor predictor_;
  ResidualMonitor monitor_;
  LevelMonitor level_;
  std::array<Alarm, kAlarmConditionCount> alarms_;
  std::vector<float> features_;
  std::vector<TemplateMatcher> matchers_;  // one per expected-event template

  bool has_last_used_ = false;
  std::size_t asset_channels_ = 1;
  bool context_fixed_ = false;
  std::vector<std::string> context_names_;
  // Each context channel's value when this one last read it (NaN: not yet, or since a gap).
  std::vector<double> context_read_;
  std::span<const ContextSource> context_;
  int closed_loop_steps_ = 0;
  bool held_out_ = false;   // closed loop ran out: fed measurements until back to normal
  double last_used_ = 0.0;  // last value the model was fed (the forecast while in alarm)
  bool has_last_time_ = false;
  TimestampUs last_time_ = 0;
  bool flatline_check_enabled_ = true;
  bool arm_failed_ = false;
  std::int64_t learnt_samples_ = 0;  // accepted samples seen while learning
  // Sample and hold: recent share of exact repeats, the present run of repeats, and the
  // smoothed length of finished runs and its square.
  double held_share_ = 0.0;
  std::int64_t hold_run_ = 0;
  double hold_run_mean_ = 0.0;
  double hold_run_square_ = 0.0;
  bool relearning_ = false;  // learning again after a new operating point
  // Resume hold (ResumeOptions): charted samples left, and the levels seen in it. Not
  // checkpointed: a restart begins a new hold.
  int hold_left_ = 0;
  bool hold_checks_level_ = false;
  RunningMoments hold_levels_;
  // The last resume with a level check (until the channel re-learns), and the one whose
  // check made it re-learn. Not checkpointed: a restart begins a new resume.
  std::optional<TimestampUs> checked_resume_;
  std::optional<TimestampUs> relearnt_resume_;
  ResidualReading last_reading_;
  ChannelStatus counters_;
  ResidualTap* tap_ = nullptr;
  std::uint32_t tap_id_ = 0;
  std::optional<Discontinuity> resume_after_;  // NoteDiscontinuity, until the next sample
  std::optional<TimestampUs> resume_clock_;    // first CheckGap clock after a kRestart
};

}  // namespace nightjar::core
