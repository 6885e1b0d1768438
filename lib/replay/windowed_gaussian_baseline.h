// WindowedGaussianBaseline: a moving-limits detector for replay scoring, one step up from
// StaticLimitsBaseline (static_limits_baseline.h): the band follows the data.
//
// Per channel it keeps the last `window` usable samples. Each new sample x is judged
// against the window *before* it is added: mean m and sample standard deviation s
// (divisor window - 1, as numpy's std(ddof=1)) of the previous `window` samples give
// ratio = |x - m| / (k * s); the value has left the band when ratio >= 1. Then x enters
// the window and the oldest sample leaves. The first `window` usable samples only fill
// the window and are never judged. A window with s = 0 (all values equal) gives ratio
// +inf for any other value and 0 for the same value, as the static baseline does.
// Every usable sample enters the window, flagged or not, so a lasting shift is learnt as
// the new normal within about one window: this is the point of a moving baseline.
//
// Defaults: window 100 samples, k = 3 (the three-sigma rule, common practice). 100 is a
// compromise, not a fitted value: the relative standard error of s over n normal
// samples is about 1 / sqrt(2 (n - 1)) (a textbook fact, from memory), 7 % at n = 100,
// so the band is steady, while the window fills within the first 10 % of even the
// shortest open series used by tests/quality (TEP: 960 rows), so every series is judged
// over most of its length.
//
// The ratio drives a core::Alarm with the given timing (by default LimitBaselineTiming,
// the engine's anomaly alarm timing without its on-delay, as for the static baseline): it
// raises when the value leaves the band and clears when the ratio is below 1 - deadband
// for the off-delay.
//
// Usable samples: finite values at a time later than the channel's previous sample; the
// others are counted (skipped_samples) and ignored, as the engine drops them.
//
// Cost: O(window) per sample (the mean and deviation are recomputed over the window in
// two passes, so there is no drift from running sums); memory window doubles per channel.
//
// Thread-safety: none; one owner thread. Process allocates when a channel is first seen
// and when it emits an edge. Ownership: owns its per-channel state; edges are values.
#pragma once

#include <cstddef>
#include <cstdint>
#include <functional>
#include <optional>
#include <string>
#include <string_view>
#include <unordered_map>
#include <vector>

#include "core/alarm.h"
#include "core/engine_options.h"
#include "core/status.h"
#include "core/time.h"
#include "replay/static_limits_baseline.h"

namespace nightjar::replay {

inline constexpr int kDefaultGaussianWindow = 100;
inline constexpr double kDefaultGaussianK = 3.0;

class WindowedGaussianBaseline {
 public:
  // window >= 2, k finite and > 0, timing passing core::ValidateAlarmTiming: see Validate
  // (asserted; in a release build bad values are clamped: window to >= 2, k to 3, the
  // timing as core::Alarm does).
  WindowedGaussianBaseline(int window, double k, core::AlarmTiming timing);
  // The defaults above with LimitBaselineTiming(options) (static_limits_baseline.h).
  explicit WindowedGaussianBaseline(const core::ChannelOptions& options);

  // OK when the arguments are in range; else InvalidArgument naming the bad one.
  static core::Status Validate(int window, double k, const core::AlarmTiming& timing);

  // Feeds one sample of `channel` (created on first sight); appends any edge to `out`.
  // Returns the sample's ratio when it was judged; nullopt while the window fills or when
  // the sample is not usable.
  std::optional<double> Process(std::string_view channel, core::TimestampUs time, double value,
                                std::vector<BaselineEdge>& out);

  // Whether the channel's alarm is active now (false if never seen).
  bool active(std::string_view channel) const;
  // Non-finite values and repeated or earlier times, over all channels.
  std::int64_t skipped_samples() const { return skipped_samples_; }

  // Name for scores and reports: "windowed gaussian".
  std::string name() const { return "windowed gaussian"; }
  int window() const { return window_; }
  double k() const { return k_; }

 private:
  struct Channel {
    Channel(const core::AlarmTiming& timing, int window)
        : values(static_cast<std::size_t>(window), 0.0), alarm(timing) {}
    std::vector<double> values;  // ring of the last `window` usable samples
    std::size_t next = 0;        // slot the next sample goes into
    std::size_t filled = 0;      // usable samples held, up to window
    std::optional<core::TimestampUs> last_time;
    core::Alarm alarm;
  };
  struct NameHash {
    using is_transparent = void;
    std::size_t operator()(std::string_view name) const {
      return std::hash<std::string_view>{}(name);
    }
  };

  int window_;
  double k_;
  core::AlarmTiming timing_;
  std::unordered_map<std::string, Channel, NameHash, std::equal_to<>> channels_;
  std::int64_t skipped_samples_ = 0;
};

}  // namespace nightjar::replay
