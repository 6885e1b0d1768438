#include "replay/threshold_sweep.h"

#include <algorithm>
#include <atomic>
#include <cmath>
#include <cstdio>
#include <limits>
#include <optional>
#include <span>
#include <thread>
#include <utility>

#include "core/alarm.h"
#include "core/cusum_detector.h"
#include "core/ewma_detector.h"
#include "core/residual_monitor.h"

namespace nightjar::replay {

namespace {

// ChannelPipeline's learning gate (core::kLearnGateSigmas) and closed-loop bookkeeping
// (channel_pipeline.cc). The base-reproduction test fails if these drift apart from the
// pipeline's.
using core::kLearnGateSigmas;
constexpr double kSuspectSigmas = 4.0;
constexpr int kMaxClosedLoopSteps = 300;

// Coordinate ascent stops after this many rounds over the channels even if a tie keeps
// moving a choice (each round either raises the overall F1 or only breaks ties).
constexpr int kMaxAscentRounds = 8;

// Settings whose charts one task re-runs: enough to spread over threads.
constexpr std::size_t kLanesPerTask = 36;

std::string Number(double value) {
  char text[32];
  std::snprintf(text, sizeof text, "%g", value);
  return text;
}

std::string Fixed(double value, int digits) {
  char text[32];
  std::snprintf(text, sizeof text, "%.*f", digits, value);
  return text;
}

struct Candidates {
  std::vector<SweepSetting> settings;  // the grid, with the base first if not in it
  std::size_t base = 0;
  // Raise times per setting; nullopt when the setting is invalid for the channel.
  std::vector<std::optional<std::vector<core::TimestampUs>>> raises;
};

double PerDay(std::size_t count, double duration_s) {
  return duration_s > 0.0 ? static_cast<double>(count) / (duration_s / core::kSecondsPerDay) : 0.0;
}

}  // namespace

SweepSetting SettingOf(const core::ChannelOptions& options) {
  return SweepSetting{.false_alarms_per_day = options.thresholds.false_alarms_per_day,
                      .cusum_k = options.thresholds.cusum_k,
                      .ewma_lambda = options.thresholds.ewma_lambda,
                      .on_delay_s = options.anomaly_alarm.on_delay_s};
}

core::ChannelOptions WithSetting(core::ChannelOptions options, const SweepSetting& setting) {
  options.thresholds.false_alarms_per_day = setting.false_alarms_per_day;
  options.thresholds.cusum_k = setting.cusum_k;
  options.thresholds.ewma_lambda = setting.ewma_lambda;
  options.anomaly_alarm.on_delay_s = setting.on_delay_s;
  return options;
}

std::string DescribeSetting(const SweepSetting& setting) {
  return "false_alarms_per_day " + Number(setting.false_alarms_per_day) + ", cusum_k " +
         Number(setting.cusum_k) + ", ewma_lambda " + Number(setting.ewma_lambda) +
         ", on_delay_s " + Number(setting.on_delay_s);
}

std::vector<SweepSetting> DefaultSweepGrid() {
  std::vector<SweepSetting> grid;
  for (const double budget : {0.1, 0.5, 2.0, 8.0}) {
    for (const double k : {0.25, 0.5, 1.0}) {
      for (const double lambda : {0.05, 0.1, 0.2}) {
        for (const double delay : {0.0, 15.0, 30.0}) {
          grid.push_back({budget, k, lambda, delay});
        }
      }
    }
  }
  return grid;
}

bool MoreSensitive(const SweepSetting& a, std::size_t a_index, const SweepSetting& b,
                   std::size_t b_index) {
  if (a.false_alarms_per_day != b.false_alarms_per_day) {
    return a.false_alarms_per_day > b.false_alarms_per_day;
  }
  if (a.on_delay_s != b.on_delay_s) return a.on_delay_s < b.on_delay_s;
  return a_index < b_index;
}

namespace {

// Samples per block: a task's lanes all run over one block before the next, so the block's
// shared inputs (5 doubles a sample) stay in L2 while every lane reads them.
constexpr std::size_t kBlockSamples = 2048;

// One setting followed with its own learning gate, as ChannelPipeline::Process does from
// the residual on: its own ResidualMonitor, alarm and closed-loop bookkeeping. The base
// setting runs this way (it gives the gate every setting shares), and so does the
// reference re-run EvaluateSettingOwnGate.
struct Lane {
  explicit Lane(const core::ChannelOptions& lane_options)
      : options(lane_options), monitor(lane_options.residual), alarm(lane_options.anomaly_alarm) {}
  core::ChannelOptions options;
  core::ResidualMonitor monitor;
  core::Alarm alarm;
  bool held_out = false;
  int closed_loop_steps = 0;
  core::Status status;
  std::vector<core::TimestampUs> raises;
};

// The pipeline's learning gate for one sample, in its two parts: trust (the alarm is not
// active outside the re-sync hold and the sample is not flat) and the scale's 6-sigma test.
struct Gate {
  bool open = false;
  bool within_sigmas = false;  // the scale is unsettled or |residual| < 6 sigma
};

inline bool Trusts(const core::Alarm& alarm, bool held_out, std::uint8_t flags) {
  return (!alarm.active() || held_out) && (flags & (kCachedFlatline | kCachedAlarmHeld)) == 0;
}

inline bool WithinSigmas(const core::ResidualMonitor& monitor, double residual) {
  return !monitor.scale_settled() || std::abs(residual / monitor.sigma()) < kLearnGateSigmas;
}

// The pipeline's closed-loop bookkeeping after a sample (held out of learning while in
// alarm or suspect, re-synced after kMaxClosedLoopSteps).
inline void Bookkeep(bool armed, bool in_alarm, double abs_z, bool& held_out,
                     int& closed_loop_steps) {
  if (!in_alarm && abs_z < kSuspectSigmas) held_out = false;
  if (closed_loop_steps >= kMaxClosedLoopSteps) held_out = true;
  const bool suspect = armed && !held_out && (in_alarm || abs_z >= kSuspectSigmas);
  closed_loop_steps = suspect ? closed_loop_steps + 1 : 0;
}

// One cached sample through one lane; returns the gate it learnt with.
inline Gate Step(Lane& lane, const ChannelResidualCache& channel, std::size_t i,
                 core::ThresholdDesigner& designer) {
  const core::TimestampUs time = channel.times[i];
  const double residual = channel.residuals[i];
  const std::uint8_t flags = channel.flags[i];
  core::ResidualMonitor& monitor = lane.monitor;
  Gate gate;
  gate.within_sigmas = WithinSigmas(monitor, residual);
  gate.open = Trusts(lane.alarm, lane.held_out, flags) && gate.within_sigmas;
  const core::ResidualReading reading = monitor.Observe(residual, gate.open);
  if (monitor.armed()) {
    if ((flags & kCachedAlarmHeld) == 0) {
      const double ratio = std::max(reading.ratio, channel.level_ratios[i]);
      const core::AlarmEdge edge = lane.alarm.Update(time, ratio);
      if (edge == core::AlarmEdge::kRaise) {
        lane.raises.push_back(time);
      } else if (edge == core::AlarmEdge::kClear) {
        monitor.ResetCharts();
      }
    }
    if ((flags & kCachedChartsReset) != 0) monitor.ResetCharts();
  } else {
    if ((flags & kCachedTailWindow) != 0) monitor.StartTailWindow();
    if ((flags & kCachedArmed) != 0) {
      core::Result<core::Thresholds> thresholds =
          designer.Design(core::SharedThresholdOptions(lane.options, channel.asset_channels),
                          channel.armed_period_s);
      if (thresholds.ok()) {
        monitor.Arm(*thresholds);
      } else if (lane.status.ok()) {
        lane.status = thresholds.status();
      }
    }
  }
  Bookkeep(monitor.armed(), lane.alarm.active(), std::abs(reading.z), lane.held_out,
           lane.closed_loop_steps);
  return gate;
}

// A channel armed from a checkpoint (ChannelResidualCache::armed_at_start): the cache
// cannot hold the loaded monitor (its scale and inflation estimates), so `monitor` learns
// them in one unarmed pass over the cached samples, through the pipeline's learning gate
// (not flat, and within kLearnGateSigmas once the scale is settled, so a fault in the
// recording is not learnt; the spike tail from the second half, as in the engine's
// warm-up). The caller arms it before the first sample.
void PreLearn(core::ResidualMonitor& monitor, const ChannelResidualCache& channel) {
  const std::size_t samples = channel.times.size();
  for (std::size_t i = 0; i < samples; ++i) {
    if (i == samples / 2) monitor.StartTailWindow();
    const double residual = channel.residuals[i];
    const bool learn = (channel.flags[i] & (kCachedFlatline | kCachedAlarmHeld)) == 0 &&
                       WithinSigmas(monitor, residual);
    monitor.Observe(residual, learn);
  }
}

// PreLearn, then armed with the lane's own thresholds and empty charts.
void PreLearnAndArm(Lane& lane, const ChannelResidualCache& channel,
                    core::ThresholdDesigner& designer) {
  PreLearn(lane.monitor, channel);
  core::Result<core::Thresholds> thresholds = designer.Design(
      core::SharedThresholdOptions(lane.options, channel.asset_channels), channel.armed_period_s);
  if (!thresholds.ok()) {
    lane.status = thresholds.status();
    return;
  }
  lane.monitor.Arm(*thresholds);
  lane.monitor.ResetCharts();
}

// Thresholds that only carry `lambda`: a learner's charts are never read.
core::Thresholds Carrier(double lambda) {
  core::Thresholds carrier;
  carrier.cusum_h = 1.0;
  carrier.ewma_lambda = lambda;
  carrier.ewma_l = 1.0;
  carrier.spike_limit = 1.0;
  return carrier;
}

// Bits of SharedLearning::gate.
constexpr std::uint8_t kBaseGateOpen = 1;
constexpr std::uint8_t kWithinSigmas = 2;

// What every setting of one channel shares: the scale, autocorrelation and inflation
// learning along the base setting's learning gate, as the chart inputs it gives. Indexed
// by sample; samples from `first_charted` on are charted.
struct SharedLearning {
  std::size_t first_charted = 0;  // the sample after the one that armed (0: armed at start)
  bool armed = false;             // false: the channel never armed, nothing is charted
  double learning_tail = 0.0;
  std::vector<double> abs_z;
  std::vector<double> cusum_input;
  std::vector<double> lambdas;                  // the distinct ewma_lambda values
  std::vector<std::vector<double>> ewma_input;  // per lambda
  std::vector<std::uint8_t> gate;
};

// Options of the settings that can run (valid keys); nullopt for the others.
std::vector<std::optional<core::ChannelOptions>> ValidOptions(
    const ChannelResidualCache& channel, std::span<const SweepSetting> settings) {
  std::vector<std::optional<core::ChannelOptions>> valid(settings.size());
  for (std::size_t s = 0; s < settings.size(); ++s) {
    core::ChannelOptions options = WithSetting(channel.options, settings[s]);
    if (!core::ValidateThresholdOptions(options.thresholds).ok()) continue;
    if (!core::ValidateAlarmTiming(options.anomaly_alarm).ok()) continue;
    valid[s] = std::move(options);
  }
  return valid;
}

core::Status InvalidSetting(const ChannelResidualCache& channel, const SweepSetting& setting) {
  const core::ChannelOptions options = WithSetting(channel.options, setting);
  core::Status invalid = core::ValidateThresholdOptions(options.thresholds);
  if (invalid.ok()) {
    invalid = core::Status::InvalidArgument(
        "anomaly_alarm." + core::ValidateAlarmTiming(options.anomaly_alarm).message());
  }
  return invalid;
}

// The base setting with its own gate (recorded) and one learner ResidualMonitor per
// lambda learning along that gate. A learner's charts are never read: its thresholds only
// have to carry its lambda, which is what Arm() measures the EWMA's spread at afresh.
SharedLearning Learn(const ChannelResidualCache& channel,
                     std::span<const std::optional<core::ChannelOptions>> valid,
                     core::ThresholdDesigner& designer) {
  SharedLearning shared;
  const std::size_t n = channel.times.size();
  for (const std::optional<core::ChannelOptions>& options : valid) {
    if (!options) continue;
    const double lambda = options->thresholds.ewma_lambda;
    if (std::find(shared.lambdas.begin(), shared.lambdas.end(), lambda) == shared.lambdas.end()) {
      shared.lambdas.push_back(lambda);
    }
  }
  Lane base(channel.options);
  std::vector<core::ResidualMonitor> learners(shared.lambdas.size(),
                                              core::ResidualMonitor(channel.options.residual));
  const bool correct = channel.options.residual.correct_autocorrelation;
  shared.abs_z.resize(n);
  shared.cusum_input.resize(n);
  shared.gate.resize(n);
  shared.ewma_input.assign(shared.lambdas.size(), std::vector<double>(n));
  if (channel.armed_at_start) {
    PreLearnAndArm(base, channel, designer);
    for (std::size_t l = 0; l < learners.size(); ++l) {
      PreLearn(learners[l], channel);
      learners[l].Arm(Carrier(shared.lambdas[l]));
    }
    shared.armed = base.status.ok() && !learners.empty();
    shared.first_charted = 0;
    if (shared.armed) shared.learning_tail = learners.back().learning_tail();
  }
  for (std::size_t i = 0; i < n; ++i) {
    const Gate gate = Step(base, channel, i, designer);
    shared.gate[i] = static_cast<std::uint8_t>((gate.open ? kBaseGateOpen : 0) |
                                               (gate.within_sigmas ? kWithinSigmas : 0));
    const double residual = channel.residuals[i];
    for (std::size_t l = 0; l < learners.size(); ++l) {
      core::ResidualMonitor& learner = learners[l];
      const double z = learner.Observe(residual, gate.open).z;
      // Exactly the chart inputs ResidualMonitor::Observe computes for an armed monitor.
      if (l == 0) {
        shared.abs_z[i] = std::abs(z);
        shared.cusum_input[i] = correct ? z / learner.cusum_inflation() : z;
      }
      shared.ewma_input[l][i] = correct ? z / learner.ewma_inflation() : z;
      if (shared.armed) continue;
      if ((channel.flags[i] & kCachedTailWindow) != 0) learner.StartTailWindow();
      if ((channel.flags[i] & kCachedArmed) != 0) {
        learner.Arm(Carrier(shared.lambdas[l]));
        if (l + 1 == learners.size()) {
          shared.armed = true;
          shared.first_charted = i + 1;
          shared.learning_tail = learner.learning_tail();
        }
      }
    }
  }
  return shared;
}

// One setting's CUSUM, EWMA and spike charts, reduced to what the alarm ratio needs and
// inlined into the sweep's loop: the arithmetic of core::CusumDetector::Add and ratio()
// (target 0, sigma 1) and core::EwmaDetector::Add and ratio() (exact limits), operation
// for operation, so the ratios are bitwise those of the monitor's charts; the parameters
// are read back from core detectors built as ResidualMonitor::Arm builds them, so their
// range clamping is the core's too. The base-reproduction and own-gate tests fail if this
// drifts from lib/core. (The core calls build a full Reading per sample; that was most of
// a setting's cost.)
class Charts {
 public:
  Charts() = default;
  Charts(const core::CusumDetector& cusum, const core::EwmaDetector& ewma, double spike_limit)
      : k_(cusum.k() * cusum.sigma()),
        h_(cusum.h() * cusum.sigma()),
        ceiling_(cusum.cap() * cusum.h() * cusum.sigma()),
        lambda_(ewma.lambda()),
        keep_(1.0 - ewma.lambda()),
        decay_step_((1.0 - ewma.lambda()) * (1.0 - ewma.lambda())),
        width_(ewma.limit_factor() * ewma.sigma() *
               std::sqrt(ewma.lambda() / (2.0 - ewma.lambda()))),
        spike_limit_(spike_limit),
        near_h_(kSurelyBelow * h_),
        near_width_(kSurelyBelow * width_),
        near_spike_(kSurelyBelow * spike_limit) {}

  // One sample into the charts.
  void Add(double cusum_input, double ewma_input) {
    if (std::isfinite(cusum_input)) {
      const double up = cusum_input - k_;
      const double down = -cusum_input - k_;
      upper_ = std::min(std::max(0.0, upper_ + up), ceiling_);
      lower_ = std::min(std::max(0.0, lower_ + down), ceiling_);
    }
    if (std::isfinite(ewma_input)) {
      z_ = lambda_ * ewma_input + keep_ * z_;
      started_ = true;
      decay_ *= decay_step_;
      if (decay_ < kDecayFlush) decay_ = 0.0;
    }
  }

  // True when ratio(abs_z) is certainly below 1, found without dividing: each chart's
  // statistic is below kSurelyBelow times its limit. With a < 0.999 b as computed
  // (relative error 2^-53), a / b < 1 - 2^-53, so its rounded quotient is below 1 too.
  // False says nothing (ratio() decides); so is it while the EWMA's limits still widen.
  bool SurelyBelowOne(double abs_z) const {
    return std::max(upper_, lower_) < near_h_ && abs_z < near_spike_ &&
           (!started_ || (decay_ == 0.0 && std::abs(z_) < near_width_));
  }

  // The alarm ratio: the largest of the three charts' ratios, as ResidualMonitor::Observe
  // forms it.
  double ratio(double abs_z) const {
    double ratio = std::max(upper_, lower_) / h_;
    if (started_) {
      const double width = width_ * std::sqrt(1.0 - decay_);
      if (width > 0.0) {
        if (const double r = std::abs(z_) / width; r > ratio) ratio = r;
      }
    }
    if (const double r = abs_z / spike_limit_; r > ratio) ratio = r;
    return ratio;
  }

  void Reset() {
    upper_ = lower_ = 0.0;
    z_ = 0.0;
    started_ = false;
    decay_ = 1.0;
  }

 private:
  static constexpr double kDecayFlush = 1e-20;  // core::EwmaDetector's
  static constexpr double kSurelyBelow = 0.999;
  double k_ = 0.5;
  double h_ = 1.0;
  double ceiling_ = 1.0;
  double lambda_ = 0.1;
  double keep_ = 0.9;
  double decay_step_ = 0.81;
  double width_ = 1.0;
  double spike_limit_ = 1.0;
  double near_h_ = 0.0;  // kSurelyBelow times the limits
  double near_width_ = 0.0;
  double near_spike_ = 0.0;
  double upper_ = 0.0;
  double lower_ = 0.0;
  double z_ = 0.0;
  bool started_ = false;
  double decay_ = 1.0;
};

// One setting on the shared chart inputs: its charts, its own core::Alarm, and its own
// gate's bookkeeping to tell where that gate departs from the base's.
struct ChartLane {
  explicit ChartLane(const core::ChannelOptions& options) : alarm(options.anomaly_alarm) {}
  Charts charts;
  std::size_t lambda = 0;  // index into SharedLearning::lambdas
  core::Alarm alarm;
  bool quiet = true;  // inactive with no on-delay pending: a ratio below 1 changes nothing
  bool held_out = false;
  int closed_loop_steps = 0;
  bool departed = false;
  SettingRaises result;
};

// Lanes interleaved sample by sample: each lane's charts are a chain of dependent
// operations, so a few lanes side by side keep the CPU busy while one waits.
constexpr std::size_t kInterleavedLanes = 4;

// One charted sample through one lane.
inline void ChartStep(ChartLane& lane, const ChannelResidualCache& channel,
                      const SharedLearning& shared, std::size_t i) {
  const core::TimestampUs* times = channel.times.data();
  const std::uint8_t* flags = channel.flags.data();
  const double* abs_z = shared.abs_z.data();
  const double* cusum_input = shared.cusum_input.data();
  const double* ewma_input = shared.ewma_input[lane.lambda].data();
  const std::uint8_t* gate = shared.gate.data();
  const double* level_ratios = channel.level_ratios.data();
  if (!lane.departed) {
    const bool own_open =
        Trusts(lane.alarm, lane.held_out, flags[i]) && (gate[i] & kWithinSigmas) != 0;
    if (own_open != ((gate[i] & kBaseGateOpen) != 0)) {
      lane.departed = true;
      lane.result.own_gate_departs = times[i];
    }
  }
  lane.charts.Add(cusum_input[i], ewma_input[i]);
  // Inactive with nothing pending, a ratio below 1 (or NaN) changes nothing in the
  // alarm but the time it has seen last (the cache's times increase): skip it. In the
  // hold after a resume the pipeline does not update the alarm at all.
  const double level_ratio = level_ratios[i];
  if ((flags[i] & kCachedAlarmHeld) == 0 &&
      (!lane.quiet || level_ratio >= 1.0 || !lane.charts.SurelyBelowOne(abs_z[i]))) {
    const double ratio = std::max(lane.charts.ratio(abs_z[i]), level_ratio);
    if (!lane.quiet || ratio >= 1.0) {
      const core::AlarmEdge edge = lane.alarm.Update(times[i], ratio);
      if (edge == core::AlarmEdge::kRaise) {
        lane.result.raises.push_back(times[i]);
      } else if (edge == core::AlarmEdge::kClear) {
        lane.charts.Reset();
      }
      lane.quiet = !lane.alarm.active() && !lane.alarm.condition_since().has_value();
    }
  }
  if ((flags[i] & kCachedChartsReset) != 0) lane.charts.Reset();
  if (!lane.departed) {
    Bookkeep(true, lane.alarm.active(), abs_z[i], lane.held_out, lane.closed_loop_steps);
  }
}

// Runs `lanes` over samples [from, to).
void ChartBlock(std::vector<ChartLane>& lanes, const ChannelResidualCache& channel,
                const SharedLearning& shared, std::size_t from, std::size_t to) {
  for (std::size_t first = 0; first < lanes.size(); first += kInterleavedLanes) {
    const std::size_t last = std::min(lanes.size(), first + kInterleavedLanes);
    for (std::size_t i = from; i < to; ++i) {
      for (std::size_t l = first; l < last; ++l) ChartStep(lanes[l], channel, shared, i);
    }
  }
}

std::vector<core::Result<SettingRaises>> RunCharts(
    const ChannelResidualCache& channel, const SharedLearning& shared,
    std::span<const SweepSetting> settings,
    std::span<const std::optional<core::ChannelOptions>> valid, core::ThresholdDesigner& designer) {
  std::vector<core::Result<SettingRaises>> results;
  results.reserve(settings.size());
  std::vector<ChartLane> lanes;
  std::vector<std::size_t> lane_of(settings.size(), settings.size());
  std::vector<core::Status> failed(settings.size());
  for (std::size_t s = 0; s < settings.size(); ++s) {
    if (!valid[s]) continue;
    ChartLane lane(*valid[s]);
    if (shared.armed) {
      core::Result<core::Thresholds> thresholds = designer.Design(
          core::SharedThresholdOptions(*valid[s], channel.asset_channels), channel.armed_period_s);
      if (!thresholds.ok()) {
        failed[s] = thresholds.status();
        continue;
      }
      // As ResidualMonitor::Arm builds its charts.
      core::CusumDetector cusum(thresholds->cusum_k, thresholds->cusum_h);
      (void)cusum.set_cap(valid[s]->residual.cusum_cap);
      const core::EwmaDetector ewma(thresholds->ewma_lambda, thresholds->ewma_l);
      lane.charts =
          Charts(cusum, ewma,
                 std::max(thresholds->spike_limit,
                          core::ResidualMonitor::kSpikeTailMargin * shared.learning_tail));
      lane.lambda = static_cast<std::size_t>(
          std::find(shared.lambdas.begin(), shared.lambdas.end(), thresholds->ewma_lambda) -
          shared.lambdas.begin());
      // The arming sample's own bookkeeping (the pipeline counts it as armed).
      if (shared.first_charted > 0) {
        Bookkeep(true, false, shared.abs_z[shared.first_charted - 1], lane.held_out,
                 lane.closed_loop_steps);
      }
    }
    lane_of[s] = lanes.size();
    lanes.push_back(std::move(lane));
  }
  if (shared.armed) {
    const std::size_t n = channel.times.size();
    for (std::size_t from = shared.first_charted; from < n; from += kBlockSamples) {
      ChartBlock(lanes, channel, shared, from, std::min(n, from + kBlockSamples));
    }
  }
  for (std::size_t s = 0; s < settings.size(); ++s) {
    if (!valid[s]) {
      results.emplace_back(InvalidSetting(channel, settings[s]));
    } else if (!failed[s].ok()) {
      results.emplace_back(failed[s]);
    } else {
      results.emplace_back(std::move(lanes[lane_of[s]].result));
    }
  }
  return results;
}

}  // namespace

std::vector<core::Result<SettingRaises>> EvaluateSettings(const ChannelResidualCache& channel,
                                                          std::span<const SweepSetting> settings,
                                                          core::ThresholdDesigner& designer) {
  const std::vector<std::optional<core::ChannelOptions>> valid = ValidOptions(channel, settings);
  const SharedLearning shared = Learn(channel, valid, designer);
  return RunCharts(channel, shared, settings, valid, designer);
}

core::Result<std::vector<core::TimestampUs>> EvaluateSetting(const ChannelResidualCache& channel,
                                                             const SweepSetting& setting,
                                                             core::ThresholdDesigner& designer) {
  core::Result<SettingRaises> run =
      std::move(EvaluateSettings(channel, std::span<const SweepSetting>(&setting, 1), designer)[0]);
  if (!run.ok()) return run.status();
  return std::move(run->raises);
}

core::Result<std::vector<core::TimestampUs>> EvaluateSettingOwnGate(
    const ChannelResidualCache& channel, const SweepSetting& setting,
    core::ThresholdDesigner& designer) {
  const std::vector<std::optional<core::ChannelOptions>> valid =
      ValidOptions(channel, std::span<const SweepSetting>(&setting, 1));
  if (!valid[0]) return InvalidSetting(channel, setting);
  Lane lane(*valid[0]);
  if (channel.armed_at_start) PreLearnAndArm(lane, channel, designer);
  for (std::size_t i = 0; i < channel.times.size(); ++i) Step(lane, channel, i, designer);
  if (!lane.status.ok()) return lane.status;
  return std::move(lane.raises);
}
core::Result<SweepResult> RunSweep(const ResidualCache& cache, const SweepOptions& options) {
  if (!(options.max_alarms_per_day > 0.0) || !std::isfinite(options.max_alarms_per_day)) {
    return core::Status::InvalidArgument("max_alarms_per_day: must be a number > 0");
  }
  const std::vector<SweepSetting> grid = options.grid.empty() ? DefaultSweepGrid() : options.grid;
  const std::size_t channel_count = cache.channels.size();
  std::vector<Candidates> candidates(channel_count);
  std::size_t settings = grid.size();
  for (std::size_t c = 0; c < channel_count; ++c) {
    Candidates& mine = candidates[c];
    const SweepSetting base = SettingOf(cache.channels[c].options);
    mine.settings = grid;
    const auto found = std::find(grid.begin(), grid.end(), base);
    if (found == grid.end()) {
      mine.settings.insert(mine.settings.begin(), base);
      mine.base = 0;
      settings = std::max(settings, grid.size() + 1);
    } else {
      mine.base = static_cast<std::size_t>(found - grid.begin());
    }
    mine.raises.resize(mine.settings.size());
  }

  // Two passes over the threads: first, per channel, the learning every setting shares
  // (the base setting's gate, the scale and inflation trajectory per lambda); then chunks
  // of one channel's settings re-run only their charts and alarms on it.
  const int jobs = std::max(1, options.jobs);
  std::vector<core::ThresholdDesigner> designers(static_cast<std::size_t>(jobs));
  const auto parallel = [&](std::size_t count, const auto& task) {
    std::atomic<std::size_t> next{0};
    const auto work = [&](core::ThresholdDesigner& designer) {
      for (std::size_t t = next.fetch_add(1); t < count; t = next.fetch_add(1)) task(t, designer);
    };
    if (jobs == 1) {
      work(designers[0]);
      return;
    }
    std::vector<std::thread> threads;
    for (core::ThresholdDesigner& designer : designers) {
      threads.emplace_back([&work, &designer] { work(designer); });
    }
    for (std::thread& thread : threads) thread.join();
  };
  // The learning of `jobs` channels at a time is held (a few MB per channel-day), then
  // their settings' charts run and it is dropped.
  struct Task {
    std::size_t channel;
    std::size_t first;
    std::size_t count;
  };
  std::int64_t evaluations = 0;
  const std::size_t window = static_cast<std::size_t>(jobs);
  for (std::size_t begin = 0; begin < channel_count; begin += window) {
    const std::size_t end = std::min(channel_count, begin + window);
    std::vector<std::vector<std::optional<core::ChannelOptions>>> valid(end - begin);
    std::vector<SharedLearning> learned(end - begin);
    parallel(end - begin, [&](std::size_t w, core::ThresholdDesigner& designer) {
      if (cache.channels[begin + w].relearned) return;  // kept at its configured setting
      valid[w] = ValidOptions(cache.channels[begin + w], candidates[begin + w].settings);
      learned[w] = Learn(cache.channels[begin + w], valid[w], designer);
    });
    std::vector<Task> tasks;
    for (std::size_t w = 0; w < end - begin; ++w) {
      if (cache.channels[begin + w].relearned) {
        Candidates& mine = candidates[begin + w];
        mine.raises[mine.base] = cache.channels[begin + w].base_anomaly_raises;
        continue;
      }
      const std::size_t total = candidates[begin + w].settings.size();
      evaluations += static_cast<std::int64_t>(total);
      for (std::size_t first = 0; first < total; first += kLanesPerTask) {
        tasks.push_back({w, first, std::min(kLanesPerTask, total - first)});
      }
    }
    parallel(tasks.size(), [&](std::size_t t, core::ThresholdDesigner& designer) {
      const Task task = tasks[t];
      Candidates& mine = candidates[begin + task.channel];
      std::vector<core::Result<SettingRaises>> raised =
          RunCharts(cache.channels[begin + task.channel], learned[task.channel],
                    std::span<const SweepSetting>(mine.settings).subspan(task.first, task.count),
                    std::span<const std::optional<core::ChannelOptions>>(valid[task.channel])
                        .subspan(task.first, task.count),
                    designer);
      for (std::size_t s = 0; s < task.count; ++s) {
        if (raised[s].ok()) mine.raises[task.first + s] = std::move(raised[s]->raises);
      }
    });
  }

  SweepResult result;
  result.labelled = options.labels.has_value();
  result.evaluations = evaluations;
  result.settings = settings;
  result.channels.resize(channel_count);
  for (std::size_t c = 0; c < channel_count; ++c) {
    const Candidates& mine = candidates[c];
    if (!mine.raises[mine.base].has_value()) {
      return core::Status::InvalidArgument("channel '" + cache.channels[c].name +
                                           "': its configured thresholds cannot be designed");
    }
  }

  // Least sensitive first: the order in which ties are decided.
  const auto least_sensitive_first = [](const Candidates& mine) {
    std::vector<std::size_t> order(mine.settings.size());
    for (std::size_t i = 0; i < order.size(); ++i) order[i] = i;
    std::sort(order.begin(), order.end(), [&mine](std::size_t a, std::size_t b) {
      return MoreSensitive(mine.settings[b], b, mine.settings[a], a);
    });
    return order;
  };

  std::vector<std::size_t> chosen(channel_count);
  for (std::size_t c = 0; c < channel_count; ++c) chosen[c] = candidates[c].base;

  if (result.labelled) {
    const std::vector<LabelWindow>& windows = *options.labels;
    // Overall F1 with channel `c` at setting `s` and every other at its present choice.
    std::vector<Raise> pooled;
    const auto overall_f1 = [&](std::size_t c, std::size_t s) {
      // Anomaly raises only, as replay scores detection (sensor alarms are data quality).
      pooled.clear();
      for (std::size_t o = 0; o < channel_count; ++o) {
        const std::size_t pick = o == c ? s : chosen[o];
        for (const core::TimestampUs t : *candidates[o].raises[pick]) {
          pooled.push_back({t, cache.channels[o].name});
        }
      }
      return ScoreEvents(pooled, windows, cache.duration_s, options.scoring).f1;
    };
    result.base_overall_f1 = overall_f1(channel_count, 0);
    for (int round = 0; round < kMaxAscentRounds; ++round) {
      bool changed = false;
      for (std::size_t c = 0; c < channel_count; ++c) {
        std::size_t best = chosen[c];
        double best_f1 = -1.0;
        for (const std::size_t s : least_sensitive_first(candidates[c])) {
          if (!candidates[c].raises[s].has_value()) continue;
          const double f1 = overall_f1(c, s);
          if (f1 > best_f1) {  // strictly: a tie stays with the less sensitive one
            best_f1 = f1;
            best = s;
          }
        }
        if (best != chosen[c]) {
          chosen[c] = best;
          changed = true;
        }
      }
      if (!changed) break;
    }
    result.chosen_overall_f1 = overall_f1(channel_count, 0);
  } else {
    result.per_channel_budget =
        options.max_alarms_per_day / static_cast<double>(std::max<std::size_t>(1, channel_count));
  }

  for (std::size_t c = 0; c < channel_count; ++c) {
    const Candidates& mine = candidates[c];
    ChannelChoice& choice = result.channels[c];
    choice.channel = cache.channels[c].name;
    choice.base = mine.settings[mine.base];
    choice.base_raises_per_day = PerDay(mine.raises[mine.base]->size(), cache.duration_s);
    if (!result.labelled) {
      // The most sensitive valid setting within the budget; none: the least sensitive.
      std::vector<std::size_t> order = least_sensitive_first(mine);
      std::size_t pick = mine.base;
      bool found = false;
      for (auto it = order.rbegin(); it != order.rend(); ++it) {
        if (!mine.raises[*it].has_value()) continue;
        if (PerDay(mine.raises[*it]->size(), cache.duration_s) <= result.per_channel_budget) {
          pick = *it;
          found = true;
          break;
        }
      }
      if (!found) {
        for (const std::size_t s : order) {
          if (mine.raises[s].has_value()) {
            pick = s;
            break;
          }
        }
      }
      chosen[c] = pick;
      choice.within_budget = found;
    }
    choice.chosen = mine.settings[chosen[c]];
    choice.chosen_raises_per_day = PerDay(mine.raises[chosen[c]]->size(), cache.duration_s);
    if (result.labelled) {
      std::vector<Raise> own;
      for (const core::TimestampUs t : *mine.raises[mine.base]) own.push_back({t, choice.channel});
      choice.base_f1 = ScoreEvents(own, *options.labels, cache.duration_s, options.scoring).f1;
      own.clear();
      for (const core::TimestampUs t : *mine.raises[chosen[c]]) {
        own.push_back({t, choice.channel});
      }
      choice.chosen_f1 = ScoreEvents(own, *options.labels, cache.duration_s, options.scoring).f1;
      choice.reason = "best overall event F1 with the other channels fixed: " +
                      Fixed(result.chosen_overall_f1, 3) + " (base setting " +
                      Fixed(result.base_overall_f1, 3) + "); this channel alone " +
                      Fixed(choice.chosen_f1, 3) + " (base " + Fixed(choice.base_f1, 3) + "), " +
                      Fixed(choice.chosen_raises_per_day, 1) + " anomaly raises/day (base " +
                      Fixed(choice.base_raises_per_day, 1) + ")";
    } else if (choice.within_budget) {
      choice.reason = "most sensitive setting within " + Fixed(result.per_channel_budget, 1) +
                      " anomaly raises/day: " + Fixed(choice.chosen_raises_per_day, 1) +
                      "/day (base setting " + Fixed(choice.base_raises_per_day, 1) + "/day)";
    } else {
      choice.reason = "no setting stays within " + Fixed(result.per_channel_budget, 1) +
                      " anomaly raises/day; least sensitive setting: " +
                      Fixed(choice.chosen_raises_per_day, 1) + "/day (base setting " +
                      Fixed(choice.base_raises_per_day, 1) + "/day)";
    }
    if (cache.channels[c].relearned) {
      choice.reason =
          "kept its configured setting: it re-learnt at a new operating point "
          "during the recording, which the sweep does not re-run";
    }
  }
  return result;
}

}  // namespace nightjar::replay
