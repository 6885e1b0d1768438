// SensorHealth: per-channel checks on the raw signal that a predictor cannot see.
//
// A forecaster judges a value by how well it was predicted, so some sensor faults look
// perfect to it: a frozen (flatlined) value is predicted exactly, a NaN has no residual,
// a reading pinned outside the instrument's span may still be "smooth". Check() looks at
// each sample for:
//  * not finite: NaN or +/-Inf;
//  * out of range: finite and outside [min_value, max_value];
//  * flatline: the value has stayed within flatline_tolerance of the run's first value for
//    at least flatline_samples consecutive finite samples (the first one included).
// GapPresent() is clock-driven: no sample for longer than gap_periods sample periods.
//
// Sample order: Check() does not look at timestamp order. A repeated or earlier
// timestamp is checked and counted like any other sample (the flatline counts samples,
// not time); the gap clock keeps the latest timestamp seen, so a backward timestamp
// neither opens nor closes a gap. Non-finite samples count as arrivals for the gap (the
// link is alive; the value fault is reported as not finite).
//
// Check() never allocates. Thread-safety: none; one owner thread (the channel's worker).
// Ownership: a plain value type, copyable.
#pragma once

#include <cstdint>
#include <limits>
#include <optional>

#include "core/status.h"
#include "core/time.h"

namespace nightjar::core {

struct SensorHealthOptions {
  // Instrument span; values outside it are out of range. -inf/+inf = no bound.
  double min_value = -std::numeric_limits<double>::infinity();
  double max_value = std::numeric_limits<double>::infinity();
  // Consecutive samples within tolerance of the run's first value that make a flatline;
  // 0 = flatline check off. At least 2 when on (one sample is always "unchanged").
  int flatline_samples = 0;
  // Absolute tolerance: |x - first| <= flatline_tolerance counts as unchanged. 0 = exact.
  double flatline_tolerance = 0;
  // A gap is no sample for longer than gap_periods x the sample period. 0 = gap check off.
  double gap_periods = 10;
};

// OK when min_value <= max_value (neither NaN), flatline_samples is 0 or >= 2,
// flatline_tolerance is finite and >= 0, and gap_periods is finite and >= 0; otherwise
// InvalidArgument naming the field.
Status ValidateSensorHealthOptions(const SensorHealthOptions& options);

// The faults present at one sample, as a bitmask. Default: no fault.
struct SensorCheck {
  static constexpr std::uint8_t kNotFinite = 1U << 0;
  static constexpr std::uint8_t kOutOfRange = 1U << 1;
  static constexpr std::uint8_t kFlatline = 1U << 2;

  std::uint8_t faults = 0;

  bool ok() const { return faults == 0; }
  bool not_finite() const { return (faults & kNotFinite) != 0; }
  bool out_of_range() const { return (faults & kOutOfRange) != 0; }
  bool flatline() const { return (faults & kFlatline) != 0; }

  friend bool operator==(SensorCheck a, SensorCheck b) { return a.faults == b.faults; }
};

// Stable lower_snake name of one fault bit for the wire: "not_finite", "out_of_range",
// "flatline"; "unknown" for anything else (including several bits at once).
const char* SensorFaultName(std::uint8_t fault_bit);

class SensorHealth {
 public:
  // `options` must pass ValidateSensorHealthOptions (asserted); in a release build an
  // invalid field falls back to its default so behaviour stays defined.
  explicit SensorHealth(const SensorHealthOptions& options = {});

  // Checks one sample taken at `t`. A non-finite value neither resets nor extends the
  // flatline run, so the kFlatline bit on such a sample reports the run as it stands
  // (a flatline alarm does not flicker because NaNs are interleaved). Out-of-range values
  // take part in the flatline run: a sensor pinned at a rail is both.
  SensorCheck Check(TimestampUs t, double value);

  // True when samples have been seen, the last one is more than gap_periods x period_s
  // before `now`, and the gap check is on. False before the first sample, when
  // gap_periods is 0, or when period_s is not a positive finite number (period unknown).
  bool GapPresent(TimestampUs now, double period_s) const;

  // Restarts the gap clock at `since` (nullopt: no gap until the next sample arrives).
  void RestartTimeline(std::optional<TimestampUs> since) { last_sample_time_ = since; }

  // Consecutive finite samples in the present flatline run (0 before the first).
  std::int64_t flatline_run() const { return run_length_; }
  // Latest sample timestamp seen; nullopt before the first sample.
  std::optional<TimestampUs> last_sample_time() const { return last_sample_time_; }

  const SensorHealthOptions& options() const { return options_; }

 private:
  friend class ChannelStateAccess;  // checkpoints (channel_state.cc)
  SensorHealthOptions options_;
  double run_first_ = 0;  // first value of the present flatline run
  std::int64_t run_length_ = 0;
  std::optional<TimestampUs> last_sample_time_;
};

}  // namespace nightjar::core
