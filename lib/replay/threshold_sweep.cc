#include "replay/threshold_sweep.h"

#include <algorithm>
#include <atomic>
#include <cmath>
#include <cstdio>
#include <limits>
#include <span>
#include <thread>
#include <utility>

#include "core/alarm.h"
#include "core/residual_monitor.h"

namespace nightjar::replay {

namespace {

// ChannelPipeline's learning gate and closed-loop bookkeeping (channel_pipeline.cc). The
// base-reproduction test fails if these drift apart from the pipeline's.
constexpr double kLearnGateSigmas = 6.0;
constexpr double kSuspectSigmas = 4.0;
constexpr int kMaxClosedLoopSteps = 300;

// Coordinate ascent stops after this many rounds over the channels even if a tie keeps
// moving a choice (each round either raises the overall F1 or only breaks ties).
constexpr int kMaxAscentRounds = 8;

// Settings re-run in lockstep by one task: enough independent work to keep the CPU's
// units busy, small enough (about 20 KB of lane state) to stay in L1 and to spread
// over threads.
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
        for (const double delay : {0.0, 10.0, 30.0}) {
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

// One candidate being re-run: the charts, the alarm and the pipeline bookkeeping.
struct Lane {
  explicit Lane(const core::ChannelOptions& lane_options)
      : options(lane_options), monitor(lane_options.residual), alarm(lane_options.anomaly_alarm) {}
  core::ChannelOptions options;
  core::ResidualMonitor monitor;
  core::Alarm alarm;
  bool held_out = false;
  int closed_loop_steps = 0;
  bool cleared_now = false;  // the alarm cleared in this sample (shared steps)
  core::Status status;
  std::vector<core::TimestampUs> raises;
};

// One cached sample through one lane: ChannelPipeline::Process from the residual on.
inline void Step(Lane& lane, const ChannelResidualCache& channel, std::size_t i,
                 core::ThresholdDesigner& designer) {
  const core::TimestampUs time = channel.times[i];
  const double residual = channel.residuals[i];
  const std::uint8_t flags = channel.flags[i];
  core::ResidualMonitor& monitor = lane.monitor;
  const bool flatline = (flags & kCachedFlatline) != 0;
  const bool trusted = (!lane.alarm.active() || lane.held_out) && !flatline;
  const bool gate_open = trusted && (!monitor.scale_settled() ||
                                     std::abs(residual / monitor.sigma()) < kLearnGateSigmas);
  const core::ResidualReading reading = monitor.Observe(residual, gate_open);
  if (monitor.armed()) {
    const core::AlarmEdge edge = lane.alarm.Update(time, reading.ratio);
    if (edge == core::AlarmEdge::kRaise) {
      lane.raises.push_back(time);
    } else if (edge == core::AlarmEdge::kClear) {
      monitor.ResetCharts();
    }
  } else {
    if ((flags & kCachedTailWindow) != 0) monitor.StartTailWindow();
    if ((flags & kCachedArmed) != 0) {
      core::Result<core::Thresholds> thresholds =
          designer.Design(lane.options.thresholds, channel.armed_period_s);
      if (thresholds.ok()) {
        monitor.Arm(*thresholds);
      } else if (lane.status.ok()) {
        lane.status = thresholds.status();
      }
    }
  }
  const bool in_alarm = lane.alarm.active();
  if (!in_alarm && std::abs(reading.z) < kSuspectSigmas) lane.held_out = false;
  if (lane.closed_loop_steps >= kMaxClosedLoopSteps) lane.held_out = true;
  const bool suspect =
      monitor.armed() && !lane.held_out && (in_alarm || std::abs(reading.z) >= kSuspectSigmas);
  lane.closed_loop_steps = suspect ? lane.closed_loop_steps + 1 : 0;
}

// Step for lanes sharing `monitor` (their trust in this sample agrees): one Observe, then
// each lane's alarm and bookkeeping. A clear in any lane resets only that lane's charts,
// so the group forks (`fork`) before the reset.
template <typename Fork, typename GroupT>
void StepShared(core::ResidualMonitor& monitor, const std::vector<std::size_t>& members,
                std::vector<Lane>& lanes, const ChannelResidualCache& channel, std::size_t i,
                core::ThresholdDesigner& designer, const Fork& fork, GroupT& group) {
  const core::TimestampUs time = channel.times[i];
  const double residual = channel.residuals[i];
  const std::uint8_t flags = channel.flags[i];
  Lane& first = lanes[members.front()];
  const bool flatline = (flags & kCachedFlatline) != 0;
  const bool trusted = (!first.alarm.active() || first.held_out) && !flatline;
  const bool gate_open = trusted && (!monitor.scale_settled() ||
                                     std::abs(residual / monitor.sigma()) < kLearnGateSigmas);
  const core::ResidualReading reading = monitor.Observe(residual, gate_open);
  const bool armed = monitor.armed();
  if (armed) {
    bool cleared = false;
    for (const std::size_t l : members) {
      Lane& lane = lanes[l];
      const core::AlarmEdge edge = lane.alarm.Update(time, reading.ratio);
      if (edge == core::AlarmEdge::kRaise) lane.raises.push_back(time);
      lane.cleared_now = edge == core::AlarmEdge::kClear;
      cleared = cleared || lane.cleared_now;
    }
    if (cleared) {
      fork(group);
      for (const std::size_t l : members) {
        if (lanes[l].cleared_now) lanes[l].monitor.ResetCharts();
      }
    }
  } else {
    if ((flags & kCachedTailWindow) != 0) monitor.StartTailWindow();
    if ((flags & kCachedArmed) != 0) {
      core::Result<core::Thresholds> thresholds =
          designer.Design(first.options.thresholds, channel.armed_period_s);
      if (thresholds.ok()) {
        monitor.Arm(*thresholds);
      } else {
        for (const std::size_t l : members) {
          if (lanes[l].status.ok()) lanes[l].status = thresholds.status();
        }
      }
    }
  }
  for (const std::size_t l : members) {
    Lane& lane = lanes[l];
    const bool in_alarm = lane.alarm.active();
    if (!in_alarm && std::abs(reading.z) < kSuspectSigmas) lane.held_out = false;
    if (lane.closed_loop_steps >= kMaxClosedLoopSteps) lane.held_out = true;
    const bool suspect =
        armed && !lane.held_out && (in_alarm || std::abs(reading.z) >= kSuspectSigmas);
    lane.closed_loop_steps = suspect ? lane.closed_loop_steps + 1 : 0;
  }
}

}  // namespace

std::vector<core::Result<std::vector<core::TimestampUs>>> EvaluateSettings(
    const ChannelResidualCache& channel, std::span<const SweepSetting> settings,
    core::ThresholdDesigner& designer) {
  std::vector<core::Result<std::vector<core::TimestampUs>>> results;
  std::vector<Lane> lanes;
  std::vector<std::size_t> lane_of(settings.size(), settings.size());
  lanes.reserve(settings.size());
  for (std::size_t s = 0; s < settings.size(); ++s) {
    const core::ChannelOptions options = WithSetting(channel.options, settings[s]);
    if (core::Status valid = core::ValidateThresholdOptions(options.thresholds); !valid.ok()) {
      continue;
    }
    if (core::Status valid = core::ValidateAlarmTiming(options.anomaly_alarm); !valid.ok()) {
      continue;
    }
    lane_of[s] = lanes.size();
    lanes.emplace_back(options);
  }
  // Lanes that differ only in the on-delay have the same charts: they share one monitor
  // (a group) until their alarms first disagree on whether a sample may be learnt or a
  // chart is reset; then each takes a copy of the shared monitor and goes on alone.
  struct Group {
    std::vector<std::size_t> members;
    core::ResidualMonitor monitor;
    bool shared = true;
  };
  std::vector<Group> groups;
  for (std::size_t l = 0; l < lanes.size(); ++l) {
    const core::ThresholdOptions& mine = lanes[l].options.thresholds;
    auto found = std::find_if(groups.begin(), groups.end(), [&](const Group& group) {
      const core::ThresholdOptions& theirs = lanes[group.members.front()].options.thresholds;
      return theirs.false_alarms_per_day == mine.false_alarms_per_day &&
             theirs.cusum_k == mine.cusum_k && theirs.ewma_lambda == mine.ewma_lambda;
    });
    if (found == groups.end()) {
      groups.push_back(Group{{}, core::ResidualMonitor(lanes[l].options.residual), true});
      found = groups.end() - 1;
    }
    found->members.push_back(l);
  }
  const auto fork = [&lanes](Group& group) {
    for (const std::size_t l : group.members) lanes[l].monitor = group.monitor;
    group.shared = false;
  };

  // A channel armed from a checkpoint: the cache cannot hold the loaded monitor (its scale
  // and inflation estimates), so each group learns them in one unarmed pass over the
  // cached samples, through the pipeline's learning gate (not flat, and within
  // kLearnGateSigmas once the scale is settled, so a fault in the recording is not learnt;
  // the spike tail from the second half, as in the engine's warm-up), and is armed before
  // the first sample.
  if (channel.armed_at_start) {
    const std::size_t samples = channel.times.size();
    for (Group& group : groups) {
      core::ResidualMonitor& monitor = group.monitor;
      for (std::size_t i = 0; i < samples; ++i) {
        if (i == samples / 2) monitor.StartTailWindow();
        const double residual = channel.residuals[i];
        const bool learn =
            (channel.flags[i] & kCachedFlatline) == 0 &&
            (!monitor.scale_settled() || std::abs(residual / monitor.sigma()) < kLearnGateSigmas);
        monitor.Observe(residual, learn);
      }
      core::Result<core::Thresholds> thresholds =
          designer.Design(lanes[group.members.front()].options.thresholds, channel.armed_period_s);
      if (thresholds.ok()) {
        monitor.Arm(*thresholds);
        monitor.ResetCharts();
      } else {
        for (const std::size_t l : group.members) lanes[l].status = thresholds.status();
      }
    }
  }

  // All lanes advance together, sample by sample: their chains of dependent divisions
  // and square roots are independent, so the CPU overlaps them.
  const std::size_t n = channel.times.size();
  for (std::size_t i = 0; i < n; ++i) {
    for (Group& group : groups) {
      if (group.shared) {
        const bool flatline = (channel.flags[i] & kCachedFlatline) != 0;
        const auto trusts = [&](const Lane& lane) {
          return (!lane.alarm.active() || lane.held_out) && !flatline;
        };
        const bool trusted = trusts(lanes[group.members.front()]);
        for (const std::size_t l : group.members) {
          if (trusts(lanes[l]) != trusted) {
            fork(group);
            break;
          }
        }
      }
      if (!group.shared) {
        for (const std::size_t l : group.members) Step(lanes[l], channel, i, designer);
        continue;
      }
      StepShared(group.monitor, group.members, lanes, channel, i, designer, fork, group);
    }
  }
  results.reserve(settings.size());
  for (std::size_t s = 0; s < settings.size(); ++s) {
    if (lane_of[s] == settings.size()) {
      const core::ChannelOptions options = WithSetting(channel.options, settings[s]);
      core::Status invalid = core::ValidateThresholdOptions(options.thresholds);
      if (invalid.ok()) {
        invalid = core::Status::InvalidArgument(
            "anomaly_alarm." + core::ValidateAlarmTiming(options.anomaly_alarm).message());
      }
      results.emplace_back(invalid);
      continue;
    }
    Lane& lane = lanes[lane_of[s]];
    if (!lane.status.ok()) {
      results.emplace_back(lane.status);
    } else {
      results.emplace_back(std::move(lane.raises));
    }
  }
  return results;
}

core::Result<std::vector<core::TimestampUs>> EvaluateSetting(const ChannelResidualCache& channel,
                                                             const SweepSetting& setting,
                                                             core::ThresholdDesigner& designer) {
  return std::move(
      EvaluateSettings(channel, std::span<const SweepSetting>(&setting, 1), designer)[0]);
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

  // Every (channel, setting) re-run is independent: chunks of one channel's settings run
  // in lockstep (EvaluateSettings) and the chunks are handed out to the threads.
  struct Task {
    std::size_t channel;
    std::size_t first;
    std::size_t count;
  };
  std::vector<Task> tasks;
  std::int64_t evaluations = 0;
  for (std::size_t c = 0; c < channel_count; ++c) {
    const std::size_t total = candidates[c].settings.size();
    evaluations += static_cast<std::int64_t>(total);
    for (std::size_t first = 0; first < total; first += kLanesPerTask) {
      tasks.push_back({c, first, std::min(kLanesPerTask, total - first)});
    }
  }
  std::atomic<std::size_t> next{0};
  const auto work = [&] {
    core::ThresholdDesigner designer;
    for (std::size_t t = next.fetch_add(1); t < tasks.size(); t = next.fetch_add(1)) {
      const Task task = tasks[t];
      Candidates& mine = candidates[task.channel];
      std::vector<core::Result<std::vector<core::TimestampUs>>> raised = EvaluateSettings(
          cache.channels[task.channel],
          std::span<const SweepSetting>(mine.settings).subspan(task.first, task.count), designer);
      for (std::size_t s = 0; s < task.count; ++s) {
        if (raised[s].ok()) mine.raises[task.first + s] = std::move(*raised[s]);
      }
    }
  };
  const int jobs = std::max(1, options.jobs);
  if (jobs == 1) {
    work();
  } else {
    std::vector<std::thread> threads;
    for (int j = 0; j < jobs; ++j) threads.emplace_back(work);
    for (std::thread& thread : threads) thread.join();
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
    // Anomaly raises only, as replay scores detection (sensor alarms are data quality).
    std::vector<Raise> pooled;
    const auto overall_f1 = [&](std::size_t c, std::size_t s) {
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
  }
  return result;
}

}  // namespace nightjar::replay
