#include "core/channel_pipeline.h"

#include <algorithm>
#include <cmath>
#include <initializer_list>
#include <limits>
#include <numbers>
#include <string>
#include <string_view>
#include <utility>

#include "core/alert_message.h"

namespace nightjar::core {

namespace {

constexpr double kPresent = 2.0;  // ratio fed to a sensor alarm whose condition holds
constexpr double kAbsent = 0.0;
constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

// kLearnGateSigmas (core/residual_monitor.h) applies even before arming: a warm-up glitch
// must not teach the model that glitches are normal.
// Armed channels do not feed residuals beyond this to the model (in-control N(0,1)
// residuals exceed it once in 16 000 samples; common practice for robust filtering).
constexpr double kSuspectSigmas = 4.0;

// Per-step damping of forecast increments while the model runs closed loop.
constexpr double kClosedLoopDamping = 0.95;
constexpr int kMaxClosedLoopSteps = 300;

// Sample-and-hold signals (a sampling analyser, a value a gateway re-sends until it
// changes): when most recent samples repeat the previous value exactly and the holds
// are regular (runs of about the same length: an update cycle), a repeat carries no new
// measurement and is not charted. Charting it would let one normal update stand for the
// whole hold: the closed-loop forecast holds off while the value holds, and the CUSUM
// adds up the same residual for every repeat. Irregular holds (a steady value with rare
// excursions, a quantised slow signal) stay charted: there a change is the news.
constexpr double kHeldSignalShare = 0.5;
constexpr double kHeldShareAlpha = 1.0 / 64.0;
constexpr double kHoldRunAlpha = 1.0 / 16.0;
constexpr double kMaxHoldRunSpread = 0.25;  // sd of the run length over its mean

// Increments smaller than this fraction of the level scale are noise to the model.
constexpr double kIncrementScaleFloor = 1e-3;

LstmPredictorOptions PredictorOptionsFor(const ChannelOptions& options, std::uint64_t seed,
                                         std::size_t context_channels) {
  LstmPredictorOptions predictor = options.predictor;
  predictor.input_size = PredictorInputCount(options, context_channels);
  predictor.seed = seed;
  return predictor;
}

// Appended to a raise that made its alarm chattering (AlarmTiming::chatter_raises): the
// operator must know why this alarm will not clear as soon as the value returns.
std::string ChatteringNote(const Alarm& alarm) {
  if (!alarm.chattering()) return {};
  const AlarmTiming& timing = alarm.timing();
  const std::string window = FormatDuration(timing.chatter_window_s);
  return "; chattering (" + std::to_string(timing.chatter_raises) + " raises within " + window +
         "): it stands until quiet for " + window;
}

}  // namespace

const char* ChannelStateName(ChannelState state) {
  switch (state) {
    case ChannelState::kLearning:
      return "learning";
    case ChannelState::kArmed:
      return "armed";
    case ChannelState::kInAlarm:
      return "in_alarm";
    case ChannelState::kStale:
      return "stale";
  }
  return "unknown";
}

const char* AlarmConditionName(AlarmCondition condition) {
  switch (condition) {
    case AlarmCondition::kAnomaly:
      return "anomaly";
    case AlarmCondition::kNotFinite:
      return "not_finite";
    case AlarmCondition::kRange:
      return "range";
    case AlarmCondition::kFlatline:
      return "flatline";
    case AlarmCondition::kGap:
      return "gap";
  }
  return "unknown";
}

bool ParseAlarmCondition(std::string_view name, AlarmCondition* condition) {
  for (int i = 0; i < kAlarmConditionCount; ++i) {
    const auto candidate = static_cast<AlarmCondition>(i);
    if (name == AlarmConditionName(candidate)) {
      *condition = candidate;
      return true;
    }
  }
  return false;
}

ChannelPipeline::ChannelPipeline(std::string name, const ChannelOptions& options,
                                 std::uint64_t seed)
    : name_(std::move(name)),
      options_(options),
      period_(SamplePeriodOptions{.learn_intervals = 64,
                                  .configured_period_s = options.sample_period_s}),
      health_(options.sensor),
      scaler_(options.scaler),
      predictor_(PredictorOptionsFor(options, seed, 0)),
      monitor_(options.residual),
      level_(options.level, options.residual),
      alarms_{{Alarm(options.anomaly_alarm), Alarm(options.sensor_alarm),
               Alarm(options.sensor_alarm), Alarm(options.sensor_alarm),
               Alarm(options.sensor_alarm)}},
      features_(static_cast<std::size_t>(PredictorInputCount(options, 0)), 0.0f) {
  matchers_.reserve(options.events.size());
  for (const EventTemplate& event : options.events) matchers_.emplace_back(event);
}

void ChannelPipeline::FixContext(std::vector<std::string> names) {
  if (names.size() > static_cast<std::size_t>(kMaxContextChannels)) {
    names.resize(static_cast<std::size_t>(kMaxContextChannels));
  }
  context_names_ = std::move(names);
  context_read_.assign(context_names_.size(), kNaN);
  context_fixed_ = true;
  SizeModelForContext();
}

void ChannelPipeline::SizeModelForContext() {
  const int inputs = PredictorInputCount(options_, context_names_.size());
  if (inputs == predictor_.options().input_size) return;
  predictor_ = LstmPredictor(
      PredictorOptionsFor(options_, predictor_.options().seed, context_names_.size()));
  features_.assign(static_cast<std::size_t>(inputs), 0.0f);
}

ContextSource ChannelPipeline::context_source() const {
  // What its own model was fed: while it is suspect or in alarm that is its forecast, so a
  // fault on this channel does not carry the models that read it off what they learnt.
  const bool valid = has_last_used_ && scaler_.ready();
  return {.value = last_used_, .increment_scale = valid ? IncrementScale() : 1.0, .valid = valid};
}

const Alarm& ChannelPipeline::alarm(AlarmCondition condition) const {
  return alarms_[static_cast<std::size_t>(condition)];
}

void ChannelPipeline::Process(TimestampUs time, double value, ThresholdDesigner& designer,
                              LstmWorkspace<float>& workspace, std::vector<Alert>& out) {
  ++counters_.samples;
  // A restored channel whose stream resumes on an earlier clock (a recording replayed on
  // a model learnt from a later one) starts a new time line rather than dropping samples.
  const bool new_timeline =
      resume_after_ == Discontinuity::kRestart && has_last_time_ && time <= last_time_;
  if (new_timeline) RestartTimeline();
  // Timestamps must increase: the first sample of a timestamp wins, later or earlier
  // duplicates are counted and dropped (DESIGN-NOTES §6).
  if (has_last_time_ && time <= last_time_) {
    ++counters_.out_of_order;
    return;
  }
  const bool after_gap =
      has_last_time_ && period_.known() &&
      ToSeconds(time - last_time_) > options_.sensor.gap_periods * period_.period_s();
  // A gap nobody noticed yet (no clock tick in between) is raised now, late but not lost;
  // not when the hole is nightjar's own (NoteDiscontinuity).
  const bool own_hole = resume_after_.has_value();
  resume_after_.reset();
  if (after_gap && !own_hole) CheckGap(time, out);
  // The recurrent state restarts (below, or in RestartTimeline) and the plant may be at
  // another operating point after the silence: hold anomaly alarms and check the level.
  // A restart that follows on within the gap limit continues as if nothing happened.
  if (after_gap || new_timeline) {
    BeginResumeHold(time, new_timeline || (has_last_time_ && ToSeconds(time - last_time_) >
                                                                 options_.resume.relearn_after_s));
  }
  has_last_time_ = true;
  last_time_ = time;
  period_.Add(time);

  Context context{time, value, kNaN, kNaN};
  if (alarm(AlarmCondition::kGap).active()) {
    UpdateSensorAlarm(AlarmCondition::kGap, false, context, out);
  }
  if (after_gap) {  // the recurrent state and the last increment are meaningless now
    predictor_.ResetSequence();
    has_last_used_ = false;
    std::fill(context_read_.begin(), context_read_.end(), kNaN);
    for (TemplateMatcher& matcher : matchers_) matcher.Reset();
  }

  const SensorCheck check = health_.Check(time, value);
  UpdateSensorAlarm(AlarmCondition::kNotFinite, check.not_finite(), context, out);
  UpdateSensorAlarm(AlarmCondition::kRange, check.out_of_range(), context, out);
  const bool learning = !monitor_.armed();
  if (learning && check.flatline()) {
    // This channel holds its value in normal operation (a setpoint, a quantised or
    // slowly sampled signal): a flatline is not a fault here.
    flatline_check_enabled_ = false;
  }
  const bool flatline = flatline_check_enabled_ && check.flatline();
  UpdateSensorAlarm(AlarmCondition::kFlatline, flatline, context, out);
  if (check.not_finite() || check.out_of_range()) {
    ++counters_.rejected;
    return;
  }
  const bool repeat = counters_.accepted_once && value == counters_.last_value;
  NoteRepeat(repeat);
  counters_.last_value = value;
  counters_.accepted_once = true;
  MatchEvents(context, out);
  if (repeat && HoldsItsSamples()) {
    ++counters_.held;
    return;
  }

  if (!has_last_used_) {  // first sample, or first after a gap: no increment yet
    last_used_ = value;
    has_last_used_ = true;
    if (!scaler_.ready()) scaler_.Learn(value);
    ++learnt_samples_;
    return;
  }
  if (!scaler_.ready()) {
    scaler_.Learn(value);
    increment_moments_.Add(value - last_used_);
    last_used_ = value;
    ++learnt_samples_;
    return;
  }

  // The model forecasts the next increment (features[0] is the scaled increment), so
  // "next = last" is where it starts and what it has to improve on; the level and the
  // time of day come in as context.
  const double predicted_increment =
      options_.forecaster == Forecaster::kLstm
          ? static_cast<double>(predictor_.prediction()) * IncrementScale()
          : 0.0;
  context.expected = last_used_ + predicted_increment;
  const bool was_in_alarm = alarm(AlarmCondition::kAnomaly).active();
  // Once the closed-loop hold has run out (held_out_), the alarm is being re-baselined:
  // the residual scale may learn again, or a scale learnt on a quiet spell would pin the
  // alarm for ever.
  // Samples in the hold after a resume are not yet known to be normal: nothing is learnt
  // from them, or a fault present since the resume would teach the residual scale itself.
  const bool holding = monitor_.armed() && hold_left_ > 0;
  const bool trusted = (!was_in_alarm || held_out_) && !flatline && !holding;
  const double residual = (value - context.expected) / scaler_.scale();
  const double z_now = residual / monitor_.sigma();
  const bool gate_open =
      trusted && (!monitor_.scale_settled() || std::abs(z_now) < kLearnGateSigmas);

  const ResidualReading forecast_reading = monitor_.Observe(residual, gate_open);
  context.z = forecast_reading.z;
  // The alarm follows whichever chart is further over its limit: the forecast residual's
  // or the level's (core/level_monitor.h), with the level's baseline as the expected value.
  ResidualReading reading = forecast_reading;
  Context alarm_context = context;
  double level_ratio = 0.0;
  if (options_.level.enabled) {
    if (!level_.started()) level_.Start(scaler_.mean(), 0);
    const ResidualReading level = level_.Observe(value, scaler_.scale(), !flatline && !holding);
    level_ratio = level.ratio;
    if (level.ratio > reading.ratio) {
      reading = level;
      alarm_context.expected = level_.baseline();
      alarm_context.z = level.z;
    }
  }
  last_reading_ = reading;
  counters_.last_expected = context.expected;
  counters_.last_z = forecast_reading.z;
  counters_.last_residual_sigma = monitor_.sigma() * scaler_.scale();
  counters_.last_ratio = reading.ratio;
  counters_.last_detector = reading.detector;

  ResidualTapPoint tapped;
  if (monitor_.armed()) {
    if (hold_left_ > 0) {
      tapped.alarm_held = true;
      hold_levels_.Add(value);
      ContinueResumeHold(context, out);
      tapped.relearned = !monitor_.armed();
      tapped.charts_reset = hold_left_ == 0 && !tapped.relearned;
    } else {
      UpdateAnomalyAlarm(reading, alarm_context, out);
    }
  } else {
    hold_left_ = 0;  // a learning channel raises nothing: there is nothing to hold
    ++learnt_samples_;
    const int arm_after = ArmAfterSamples();
    if (learnt_samples_ == arm_after / 2) {
      monitor_.StartTailWindow();
      tapped.tail_window_started = true;
    }
    if (learnt_samples_ >= arm_after) {
      TryArm(designer);
      tapped.armed = monitor_.armed();
    }
  }
  if (tap_ != nullptr) {
    tapped.channel = tap_id_;
    tapped.time = time;
    tapped.residual = residual;
    tapped.flatline = flatline;
    tapped.level_ratio = level_ratio;
    tapped.sample_period_s = tapped.armed ? period_.period_s() : 0.0;
    tap_->OnResidual(tapped);
  }

  // While in alarm, and for any sample far off the forecast, the model is not fed the
  // measurement: it continues its own forecast (closed loop) and learns nothing. A one-step
  // predictor fed a faulty value follows a step within a sample or two and the evidence vanishes
  // before the charts can add it up (DESIGN-NOTES §3); a lone glitch costs one forecast step. The
  // forecast increment is damped in closed loop, and after kMaxClosedLoopSteps the model re-syncs
  // with the measurements (and stays open loop until the channel is back to normal) so
  // a lasting change of level cannot hold it off for ever.
  const bool in_alarm = alarm(AlarmCondition::kAnomaly).active();
  if (!in_alarm && std::abs(forecast_reading.z) < kSuspectSigmas) held_out_ = false;
  if (closed_loop_steps_ >= kMaxClosedLoopSteps) held_out_ = true;  // re-sync until normal
  const bool suspect = monitor_.armed() && !held_out_ &&
                       (in_alarm || std::abs(forecast_reading.z) >= kSuspectSigmas);
  closed_loop_steps_ = suspect ? closed_loop_steps_ + 1 : 0;
  const double damping = std::pow(kClosedLoopDamping, static_cast<double>(closed_loop_steps_));
  const double used = suspect ? last_used_ + damping * predicted_increment : value;
  const double increment = used - last_used_;
  const bool learn = gate_open && !in_alarm && !suspect;
  if (learn && !monitor_.armed()) {
    scaler_.Learn(value);
    increment_moments_.Add(increment);
  }
  FillFeatures(time, increment, used);
  if (options_.forecaster == Forecaster::kLstm) {
    predictor_.Observe(features_.data(), learn, workspace);
  }
  last_used_ = used;
}

void ChannelPipeline::NoteRepeat(bool repeat) {
  held_share_ += kHeldShareAlpha * ((repeat ? 1.0 : 0.0) - held_share_);
  if (repeat) {
    ++hold_run_;
    return;
  }
  const double run = static_cast<double>(hold_run_);
  hold_run_mean_ += kHoldRunAlpha * (run - hold_run_mean_);
  hold_run_square_ += kHoldRunAlpha * (run * run - hold_run_square_);
  hold_run_ = 0;
}

bool ChannelPipeline::HoldsItsSamples() const {
  if (held_share_ < kHeldSignalShare || hold_run_mean_ <= 0.0) return false;
  const double variance = std::max(0.0, hold_run_square_ - hold_run_mean_ * hold_run_mean_);
  // A run longer than any seen in a regular cycle is a stop, not a hold: chart it again.
  if (static_cast<double>(hold_run_) > 2.0 * hold_run_mean_ + 1.0) return false;
  return std::sqrt(variance) <= kMaxHoldRunSpread * hold_run_mean_;
}

double ChannelPipeline::IncrementScale() const {
  const double spread = increment_moments_.count() > 1 ? increment_moments_.stddev() : 0.0;
  return std::max(spread, kIncrementScaleFloor * scaler_.scale());
}

void ChannelPipeline::FillFeatures(TimestampUs time, double increment, double level) {
  features_[0] = static_cast<float>(
      std::clamp(increment / IncrementScale(), -InputScaler::kMaxScaled, InputScaler::kMaxScaled));
  features_[1] = static_cast<float>(scaler_.Scale(level));
  if (features_.size() >= 4) {
    const std::int64_t day_us = static_cast<std::int64_t>(kSecondsPerDay) * kMicrosPerSecond;
    std::int64_t of_day = time % day_us;
    if (of_day < 0) of_day += day_us;
    const double angle =
        2.0 * std::numbers::pi * static_cast<double>(of_day) / static_cast<double>(day_us);
    features_[2] = static_cast<float>(std::sin(angle));
    features_[3] = static_cast<float>(std::cos(angle));
  }
  // Each context input is how far that channel moved since this one last read it, in its
  // own increments: the change, not the level, so a slow context channel (an ambient
  // temperature) that wanders beyond what was learnt cannot bias the forecast, and a
  // silent one feeds 0 rather than its last increment for ever. One sampled slower than
  // this channel shows its change once; one sampled faster, the sum of its changes.
  const std::size_t own = static_cast<std::size_t>(PredictorInputCount(options_, 0));
  for (std::size_t i = 0; i < context_read_.size() && own + i < features_.size(); ++i) {
    float input = 0.0f;
    const bool valid = i < context_.size() && context_[i].valid;
    if (valid && std::isfinite(context_read_[i])) {
      const ContextSource& source = context_[i];
      input =
          static_cast<float>(std::clamp((source.value - context_read_[i]) / source.increment_scale,
                                        -InputScaler::kMaxScaled, InputScaler::kMaxScaled));
    }
    // A context channel that lost its value (a gap) starts afresh when it has one again.
    context_read_[i] = valid ? context_[i].value : kNaN;
    features_[own + i] = input;
  }
}

void ChannelPipeline::MatchEvents(const Context& context, std::vector<Alert>& out) {
  for (std::size_t i = 0; i < matchers_.size(); ++i) {
    TemplateMatcher& matcher = matchers_[i];
    const std::optional<TemplateMatch> match = matcher.Add(context.value);
    if (!match) continue;
    // An event is a moment, not a condition: its raise and clear carry the same time.
    Alert alert;
    alert.time = context.time;
    alert.channel = name_;
    alert.kind = AlertKind::kEvent;
    alert.detector = Detector::kTemplate;
    alert.value = context.value;
    alert.expected = std::numeric_limits<double>::quiet_NaN();
    alert.z = std::numeric_limits<double>::quiet_NaN();
    alert.statistic = match->distance;
    alert.threshold = options_.events[i].max_distance;
    alert.priority = options_.event_priority;
    alert.message = name_ + ": " + matcher.name() + " seen over the last " +
                    std::to_string(match->length) + " samples (shape distance " +
                    FormatValue(match->distance) + ")";
    out.push_back(alert);
    alert.phase = AlertPhase::kClear;
    out.push_back(std::move(alert));
  }
}

int ChannelPipeline::ArmAfterSamples() const {
  return relearning_ ? std::max(options_.resume.relearn_samples, options_.scaler.warmup_samples)
                     : options_.warmup_samples;
}

void ChannelPipeline::BeginResumeHold(TimestampUs time, bool check_level) {
  hold_left_ = options_.resume.hold_samples;
  hold_checks_level_ = check_level;
  hold_levels_.Reset();
  checked_resume_.reset();
  if (check_level && hold_left_ > 0) checked_resume_ = time;
}

void ChannelPipeline::ContinueResumeHold(const Context& context, std::vector<Alert>& out) {
  if (--hold_left_ > 0) return;
  const double off_sd = std::abs(hold_levels_.mean() - scaler_.mean()) / scaler_.scale();
  if (hold_checks_level_ && off_sd > options_.resume.relearn_beyond_sd) {
    relearnt_resume_ = checked_resume_;
    Relearn(context, "is at an operating point the model never learnt; re-learning", out);
    return;
  }
  // The charts start afresh: the sums of the recurrent state's start-up transient (and of
  // a glitch in the hold) would otherwise raise now. A fault present since the resume
  // raises within the charts' usual delay.
  monitor_.ResetCharts();
  // After a long hole the level over the hold passed the check: the plant came back near
  // the learnt operating point, and the level chart measures from where it came back, not
  // from where it was before (a unit restarted a degree warmer is not a fault).
  if (hold_checks_level_ && level_.started()) {
    level_.Start(hold_levels_.mean(), hold_levels_.count());
  } else {
    level_.ResetCharts();
  }
}

bool ChannelPipeline::RelearnWithAsset(TimestampUs sibling_resume, TimestampUs now,
                                       std::vector<Alert>& out) {
  if (!options_.resume.relearn_with_asset || !monitor_.armed() || !checked_resume_) return false;
  const TimestampUs hold = std::max<TimestampUs>(0, now - sibling_resume);
  const TimestampUs apart = *checked_resume_ > sibling_resume ? *checked_resume_ - sibling_resume
                                                              : sibling_resume - *checked_resume_;
  if (apart > hold) return false;
  const Context context{now, counters_.last_value, counters_.last_expected, counters_.last_z};
  Relearn(context, "its asset is at an operating point the model never learnt; re-learning", out);
  if (tap_ != nullptr) tap_->OnRelearn(tap_id_);
  return true;
}

void ChannelPipeline::Relearn(const Context& context, std::string_view why,
                              std::vector<Alert>& out) {
  // An alarm from before the hole goes, and says why.
  if (alarm_for(AlarmCondition::kAnomaly).Withdraw(context.time) == AlarmEdge::kClear) {
    Alert alert;
    alert.time = context.time;
    alert.channel = name_;
    alert.kind = AlertKind::kAnomaly;
    alert.detector = counters_.last_detector;
    alert.phase = AlertPhase::kClear;
    alert.value = context.value;
    alert.expected = context.expected;
    alert.z = context.z;
    alert.statistic = kNaN;
    alert.threshold = kNaN;
    alert.priority = options_.anomaly_priority;
    alert.message = name_ +
                    ": anomaly alarm cleared: " + FormatWithUnit(context.value, options_.unit) +
                    " " + std::string(why);
    out.push_back(std::move(alert));
  }
  // The model's weights are kept (the dynamics carry over); the scales it sees its inputs
  // and residuals through are learnt anew at the new level.
  scaler_ = InputScaler(options_.scaler);
  increment_moments_ = RunningMoments();
  monitor_ = ResidualMonitor(options_.residual);
  level_ = LevelMonitor(options_.level, options_.residual);
  predictor_.ResetSequence();
  has_last_used_ = false;
  closed_loop_steps_ = 0;
  held_out_ = false;
  learnt_samples_ = 0;
  relearning_ = true;
  hold_left_ = 0;
  checked_resume_.reset();
  ++counters_.relearns;
}

void ChannelPipeline::RestartTimeline() {
  has_last_time_ = false;
  period_.Restart();
  health_.RestartTimeline(std::nullopt);
  predictor_.ResetSequence();
  has_last_used_ = false;
  closed_loop_steps_ = 0;
  for (TemplateMatcher& matcher : matchers_) matcher.Reset();
}

bool ChannelPipeline::ConcludeKnownGood(ThresholdDesigner& designer) {
  if (monitor_.armed()) {
    (void)monitor_.CoverInControlRecord();
    if (level_.armed()) (void)level_.CoverInControlRecord();
  } else if (scaler_.ready() && monitor_.scale_settled()) {
    TryArm(designer);
  }
  for (Alarm& alarm : alarms_) alarm = Alarm(alarm.timing());
  monitor_.ResetCharts();
  level_.ResetCharts();
  closed_loop_steps_ = 0;
  held_out_ = false;
  return monitor_.armed();
}

void ChannelPipeline::TryArm(ThresholdDesigner& designer) {
  if (arm_failed_ || !period_.known()) return;
  Result<Thresholds> thresholds =
      designer.Design(SharedThresholdOptions(options_, asset_channels_), period_.period_s());
  if (!thresholds.ok()) {
    // Options are validated when the channel is created, so this is a bug; stay
    // learning rather than raise alarms on a broken design.
    arm_failed_ = true;
    return;
  }
  monitor_.Arm(*thresholds);
  if (options_.level.enabled) {
    ThresholdOptions level_budget;
    level_budget.false_alarms_per_day =
        options_.level.false_alarms_per_day * BudgetShare(options_, asset_channels_);
    Result<Thresholds> level = designer.Design(level_budget, period_.period_s());
    if (level.ok()) level_.Arm(*level);
  }
  scaler_.Freeze();
  relearning_ = false;
}

void ChannelPipeline::UpdateSensorAlarm(AlarmCondition condition, bool present,
                                        const Context& context, std::vector<Alert>& out) {
  const AlarmEdge edge = alarm_for(condition).Update(context.time, present ? kPresent : kAbsent);
  if (edge != AlarmEdge::kNone) EmitEdge(condition, edge, context, nullptr, out);
}

void ChannelPipeline::UpdateAnomalyAlarm(const ResidualReading& reading, const Context& context,
                                         std::vector<Alert>& out) {
  const AlarmEdge edge = alarm_for(AlarmCondition::kAnomaly).Update(context.time, reading.ratio);
  if (edge == AlarmEdge::kNone) return;
  if (edge == AlarmEdge::kClear) {
    // Start the next episode from zero: the capped sums still hold the old fault.
    monitor_.ResetCharts();
  }
  EmitEdge(AlarmCondition::kAnomaly, edge, context, &reading, out);
}

void ChannelPipeline::CheckGap(TimestampUs now, std::vector<Alert>& out) {
  if (!has_last_time_ || !period_.known() || alarm(AlarmCondition::kGap).active()) return;
  if (resume_after_) {  // silence since nightjar's own hole (NoteDiscontinuity)
    if (*resume_after_ == Discontinuity::kDropped) return;
    if (!resume_clock_) resume_clock_ = now;
    if (ToSeconds(now - *resume_clock_) <= options_.sensor.gap_periods * period_.period_s()) {
      return;
    }
  }
  if (!health_.GapPresent(now, period_.period_s())) return;
  Context context{now, kNaN, kNaN, kNaN};
  UpdateSensorAlarm(AlarmCondition::kGap, true, context, out);
}

void ChannelPipeline::EmitEdge(AlarmCondition condition, AlarmEdge edge, const Context& context,
                               const ResidualReading* reading, std::vector<Alert>& out) {
  const Alarm& source = alarm(condition);
  Alert alert;
  alert.time = context.time;
  alert.channel = name_;
  alert.phase = edge == AlarmEdge::kRaise ? AlertPhase::kRaise : AlertPhase::kClear;
  alert.value = context.value;
  alert.expected = context.expected;
  alert.z = context.z;
  const double since_s = ToSeconds(context.time - source.condition_since().value_or(context.time));
  const double lasted_s = ToSeconds(context.time - source.raised_at().value_or(context.time));
  const std::string& unit = options_.unit;

  if (condition == AlarmCondition::kAnomaly) {
    alert.kind = AlertKind::kAnomaly;
    alert.priority = options_.anomaly_priority;
    alert.detector = reading->detector;
    alert.statistic = reading->statistic;
    alert.threshold = reading->threshold;
    if (alert.phase == AlertPhase::kRaise) {
      const double run_s =
          period_.known() ? static_cast<double>(reading->run_length) * period_.period_s() : 0.0;
      alert.message =
          AnomalyRaiseMessage(name_, unit, context.value, context.expected, context.z,
                              std::max(since_s, run_s), reading->detector == Detector::kSpike);
      alert.message += ChatteringNote(source);
    } else {
      alert.message = AnomalyClearMessage(name_, unit, context.value, context.expected, lasted_s);
    }
    out.push_back(std::move(alert));
    return;
  }

  alert.kind = AlertKind::kSensor;
  alert.priority = options_.sensor_priority;
  alert.statistic = alert.phase == AlertPhase::kRaise ? 1.0 : 0.0;
  alert.threshold = 1.0;
  const bool raise = alert.phase == AlertPhase::kRaise;
  // Built by appending pieces: GCC 12 gives a false -Wrestrict on `" " + std::string`.
  std::string message = name_;
  const std::string value_text = FormatWithUnit(context.value, unit);
  auto add = [&message](std::initializer_list<std::string_view> parts) {
    for (const std::string_view part : parts) message.append(part);
  };
  switch (condition) {
    case AlarmCondition::kNotFinite:
      alert.detector = Detector::kNotFinite;
      if (raise) {
        add({" sent a value that is not a number (NaN or Inf)"});
      } else {
        add({" sends numbers again: ", value_text});
      }
      break;
    case AlarmCondition::kRange:
      alert.detector = Detector::kRange;
      if (raise) {
        add({" ", value_text, " is outside its physical range [",
             FormatValue(options_.sensor.min_value), ", ", FormatValue(options_.sensor.max_value),
             "]"});
      } else {
        add({" back inside its physical range at ", value_text});
      }
      break;
    case AlarmCondition::kFlatline: {
      alert.detector = Detector::kFlatline;
      alert.statistic = raise ? static_cast<double>(options_.sensor.flatline_samples) : 0.0;
      alert.threshold = static_cast<double>(options_.sensor.flatline_samples);
      const std::string samples = std::to_string(options_.sensor.flatline_samples);
      if (raise) {
        add({" stuck at ", value_text, " for ", samples,
             " samples (sensor or transmitter fault?)"});
      } else {
        add({" moving again at ", value_text, " after ", FormatDuration(lasted_s)});
      }
      break;
    }
    case AlarmCondition::kGap:
      alert.detector = Detector::kGap;
      alert.statistic = ToSeconds(context.time - last_time_);
      alert.threshold = options_.sensor.gap_periods * period_.period_s();
      if (raise) {
        add({": no sample for ", FormatDuration(alert.statistic), " (expected every ",
             FormatDuration(period_.period_s()), ")"});
      } else {
        add({" samples again after a gap of ", FormatDuration(lasted_s)});
      }
      break;
    case AlarmCondition::kAnomaly:
      break;
  }
  (void)since_s;
  if (raise) message += ChatteringNote(source);
  alert.message = std::move(message);
  out.push_back(std::move(alert));
}

Status ChannelPipeline::Acknowledge(AlarmCondition condition, TimestampUs now) {
  return alarm_for(condition).Acknowledge(now);
}

Status ChannelPipeline::Shelve(AlarmCondition condition, TimestampUs now, TimestampUs until) {
  return alarm_for(condition).Shelve(now, until);
}

Status ChannelPipeline::Unshelve(AlarmCondition condition, TimestampUs now,
                                 std::vector<Alert>& out) {
  if (!alarm(condition).shelved()) {
    return Status::FailedPrecondition(std::string(AlarmConditionName(condition)) + " alarm of " +
                                      name_ + " is not shelved");
  }
  const AlarmEdge edge = alarm_for(condition).Unshelve(now);
  if (edge != AlarmEdge::kNone) {
    Context context{now, counters_.last_value, counters_.last_expected, counters_.last_z};
    EmitEdge(condition, edge, context,
             condition == AlarmCondition::kAnomaly ? &last_reading_ : nullptr, out);
  }
  return Status::Ok();
}

ChannelStatus ChannelPipeline::status() const {
  ChannelStatus status = counters_;
  status.relearning = relearning_;
  status.sample_period_s = period_.known() ? period_.period_s() : 0.0;
  status.design_arl0 = monitor_.armed() ? monitor_.thresholds().arl0_per_chart : 0.0;
  if (alarm(AlarmCondition::kGap).active()) {
    status.state = ChannelState::kStale;
  } else if (!monitor_.armed()) {
    status.state = ChannelState::kLearning;
  } else if (alarm(AlarmCondition::kAnomaly).active()) {
    status.state = ChannelState::kInAlarm;
  } else {
    status.state = ChannelState::kArmed;
  }
  return status;
}

std::size_t ChannelPipeline::MemoryBytes() const {
  std::size_t matchers_bytes = matchers_.capacity() * sizeof(TemplateMatcher);
  for (const TemplateMatcher& matcher : matchers_) matchers_bytes += matcher.MemoryBytes();
  return sizeof(*this) + name_.capacity() + options_.unit.capacity() +
         features_.capacity() * sizeof(float) + predictor_.MemoryBytes() + matchers_bytes;
}

}  // namespace nightjar::core
