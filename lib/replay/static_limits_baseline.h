// StaticLimitsBaseline: the plainest detector a learnt one must beat, for replay scoring.
//
// Per channel it learns fixed limits mean +- k * sigma (sample mean and sample standard
// deviation, Welford) over the channel's first `warmup_samples` usable samples, then
// judges every later sample by ratio = |value - mean| / (k * sigma): the value has left
// the band when ratio >= 1. The ratio drives a core::Alarm with the given timing, so with
// the engine's anomaly off-delay and deadband (LimitBaselineTiming below, which leaves out
// the on-delay) it raises when the value leaves the band and clears when it is back inside
// the deadband (ratio < 1 - deadband) for the off-delay.
// The limits never move after the warm-up. A channel constant over its warm-up has a
// zero-width band: any other value then raises (ratio +inf), the same value gives 0.
//
// Usable samples: finite values at a time later than the channel's previous sample. A
// non-finite value or a repeated or earlier time is counted (skipped_samples) and
// ignored, as the engine drops them.
//
// The first `warmup_samples` usable samples of a channel are learnt from, never judged;
// every later one is judged.
//
// Thread-safety: none; one owner thread. Process allocates when a channel is first seen
// and when it emits an edge. Ownership: owns its per-channel state; edges are values.
#pragma once

#include <cstdint>
#include <functional>
#include <optional>
#include <string>
#include <string_view>
#include <unordered_map>
#include <vector>

#include "core/alarm.h"
#include "core/alert.h"
#include "core/engine_options.h"
#include "core/running_moments.h"
#include "core/status.h"
#include "core/time.h"

namespace nightjar::replay {

// One raise or clear of the baseline's alarm on a channel.
struct BaselineEdge {
  core::TimestampUs time = 0;  // sample time that caused the edge
  std::string channel;
  core::AlertPhase phase = core::AlertPhase::kRaise;
  double value = 0.0;  // the sample's value
  double ratio = 0.0;  // |value - mean| / (k * sigma) at the edge
  // Set by the scorer's grouping of the baseline's alarms into asset episodes, as the
  // engine groups its own (core/alarm_episodes.h).
  bool annunciated = true;
};

// Shared by the limit baselines (static and windowed gaussian): the alarm ratio of a
// deviation from the band's centre, where a band of zero width is crossed by any deviation
// (an infinite ratio) and by no zero one.
double LimitRatio(double deviation, double half_width);
// The alarm timing both limit baselines take from the engine's options: the anomaly
// alarm's off-delay, deadband and shelving limit, but no on-delay. They flag one sample at
// a time, and on a slowly sampled series an on-delay would silence exactly the lone
// far-out samples they exist to catch; scoring them with it would make nightjar look
// better by handicapping them, so they keep their own best form.
core::AlarmTiming LimitBaselineTiming(const core::ChannelOptions& options);
// Feeds `ratio` to the channel's alarm and appends the edge it gives, if any.
void UpdateLimitAlarm(core::Alarm& alarm, core::TimestampUs time, const std::string& channel,
                      double value, double ratio, std::vector<BaselineEdge>& out);

// The learnt limits of one channel.
struct StaticLimits {
  double mean = 0.0;
  double sigma = 0.0;  // sample standard deviation over the warm-up
  double lower = 0.0;  // mean - k * sigma
  double upper = 0.0;  // mean + k * sigma
};

class StaticLimitsBaseline {
 public:
  // warmup_samples >= 2, k finite and > 0, timing passing core::ValidateAlarmTiming: see
  // Validate (asserted; in a release build bad values are clamped: warm-up to >= 2, k to
  // 3 when not finite or <= 0, the timing as core::Alarm does).
  explicit StaticLimitsBaseline(int warmup_samples, double k, core::AlarmTiming timing);
  // The engine's terms: options.warmup_samples, k = 3, LimitBaselineTiming(options).
  explicit StaticLimitsBaseline(const core::ChannelOptions& options);

  // OK when the arguments are in range; else InvalidArgument naming the bad one.
  static core::Status Validate(int warmup_samples, double k, const core::AlarmTiming& timing);

  // Feeds one sample of `channel` (created on first sight); appends any edge to `out`.
  void Process(std::string_view channel, core::TimestampUs time, double value,
               std::vector<BaselineEdge>& out);

  // The channel's limits once its warm-up is over; nullopt before or if never seen.
  std::optional<StaticLimits> limits(std::string_view channel) const;
  // Whether the channel's alarm is active now (false if never seen).
  bool active(std::string_view channel) const;
  // Non-finite values and repeated or earlier times, over all channels.
  std::int64_t skipped_samples() const { return skipped_samples_; }

  // Name for scores and reports, UTF-8: "static ±3σ" for k = 3 (k as %g).
  std::string name() const;
  int warmup_samples() const { return warmup_samples_; }
  double k() const { return k_; }

 private:
  struct Channel {
    explicit Channel(const core::AlarmTiming& timing) : alarm(timing) {}
    core::RunningMoments moments;
    std::optional<core::TimestampUs> last_time;
    bool armed = false;
    double mean = 0.0;
    double half_width = 0.0;  // k * sigma
    core::Alarm alarm;
  };
  struct NameHash {
    using is_transparent = void;
    std::size_t operator()(std::string_view name) const {
      return std::hash<std::string_view>{}(name);
    }
  };
  const Channel* Find(std::string_view channel) const;

  int warmup_samples_;
  double k_;
  core::AlarmTiming timing_;
  std::unordered_map<std::string, Channel, NameHash, std::equal_to<>> channels_;
  std::int64_t skipped_samples_ = 0;
};

}  // namespace nightjar::replay
