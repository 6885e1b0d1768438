// SamplePeriod: a channel's nominal sample period, estimated robustly from arrival times.
//
// The estimate is the median of the first learn_intervals positive intervals between
// consecutive timestamps; after that it is frozen (a later gap or a burst does not move
// it). The median shrugs off jitter, the odd gap and the odd late sample. A configured
// period, when given, is what period_s() reports from the start; the estimate is still
// made and exposed so a caller can warn when the two disagree.
//
// Sampling clocks lie (DESIGN-NOTES §6); the defined behaviour is:
//  * a repeated timestamp (interval 0) is counted in duplicates() and ignored: no
//    interval, and the next interval is measured from the same earlier sample;
//  * a backward jump (t earlier than the previous timestamp) is counted in
//    backward_jumps(), gives no interval, and measurement restarts from t. A clock that
//    was reset thus keeps being measured; one out-of-order sample costs at most one
//    outlier interval, which the median absorbs.
//
// Memory: the learning buffer is allocated once at construction and released when the
// estimate freezes; Add() never allocates. Thread-safety: none; one owner thread.
// Ownership: a plain value type, copyable.
#pragma once

#include <cstdint>
#include <limits>
#include <optional>
#include <vector>

#include "core/status.h"
#include "core/time.h"

namespace nightjar::core {

struct SamplePeriodOptions {
  // Positive intervals whose median becomes the estimate. Range [1, 4096].
  int learn_intervals = 64;
  // Known nominal period in seconds; overrides the estimate in period_s(). 0 = none.
  double configured_period_s = 0;
};

// OK when learn_intervals is in [1, 4096] and configured_period_s is finite and >= 0;
// otherwise InvalidArgument naming the field.
Status ValidateSamplePeriodOptions(const SamplePeriodOptions& options);

class SamplePeriod {
 public:
  // `options` must pass ValidateSamplePeriodOptions (asserted); in a release build an
  // invalid field falls back to its default.
  explicit SamplePeriod(const SamplePeriodOptions& options = {});

  // Records the arrival timestamp of one sample (see the header comment for repeats and
  // backward jumps).
  void Add(TimestampUs t);
  // Forgets the last timestamp: the next Add() starts a new time line (no interval).
  void Restart() { last_.reset(); }

  // True when period_s() is meaningful: a period was configured or the estimate is frozen.
  bool known() const { return configured_ || estimate_known(); }
  // The configured period if any, else the frozen estimate; NaN while unknown.
  double period_s() const { return configured_ ? options_.configured_period_s : estimate_s_; }

  // The estimate alone, whether or not a period was configured.
  bool estimate_known() const { return intervals_seen_ >= options_.learn_intervals; }
  double estimated_period_s() const { return estimate_s_; }  // NaN until estimate_known()

  std::int64_t samples() const { return samples_; }  // every Add, accepted or not
  std::int64_t duplicates() const { return duplicates_; }
  std::int64_t backward_jumps() const { return backward_jumps_; }
  // Positive intervals used so far (stops growing at learn_intervals).
  int intervals_seen() const { return intervals_seen_; }

  const SamplePeriodOptions& options() const { return options_; }

 private:
  friend class ChannelStateAccess;  // checkpoints (channel_state.cc)
  // Median of intervals_ in seconds; reorders intervals_ in place (no allocation).
  double MedianSeconds();

  SamplePeriodOptions options_;
  bool configured_ = false;
  // Sized (not reserved) to learn_intervals, so a copy keeps its room too.
  std::vector<TimestampUs> intervals_;
  int intervals_seen_ = 0;
  double estimate_s_ = std::numeric_limits<double>::quiet_NaN();
  std::optional<TimestampUs> last_;
  std::int64_t samples_ = 0;
  std::int64_t duplicates_ = 0;
  std::int64_t backward_jumps_ = 0;
};

}  // namespace nightjar::core
