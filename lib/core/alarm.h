// Alarm: one alarm instance (say "anomaly on channel X") as an ISA-18.2 state machine.
//
// Two layers:
//  * The condition. Each Update() gives `ratio` = statistic / threshold. The condition is
//    present when ratio >= 1; once raised it clears only when ratio < 1 - deadband
//    (hysteresis, against chattering). On-delay: ratio >= 1 must hold on every update for
//    on_delay_s before the raise. Off-delay: ratio < 1 - deadband must hold on every
//    update for off_delay_s before the clear. active() is this latched condition.
//    Chattering (ISA-18.2: an alarm that returns repeatedly in a short time): once the
//    condition has raised chatter_raises times within chatter_window_s, the next clear
//    waits chatter_window_s instead of off_delay_s, so a repeating alarm stands as one
//    alarm instead of flooding the operator; it clears after a quiet window.
//  * Annunciation, the ISA-18.2 alarm states (ANSI/ISA-18.2-2016 state diagram):
//      Normal --raise--> Unacknowledged --ack--> Acknowledged --clear--> Normal
//      Unacknowledged --clear--> ReturnedUnacknowledged --ack--> Normal
//      ReturnedUnacknowledged --raise--> Unacknowledged
//    Shelved, SuppressedByDesign and OutOfService silence the alarm: the condition is
//    still tracked, but no raise or clear is annunciated (Update returns kNone) and there
//    is nothing to acknowledge. When the last silencing ends, the alarm returns to the
//    state its condition implies, dropping any earlier acknowledgement: active ->
//    Unacknowledged and the call reports kRaise (the operator sees it again); inactive ->
//    Normal and kNone. If several silencing reasons hold at once, state() reports the
//    strongest: OutOfService, then SuppressedByDesign, then Shelved.
//
// Time: every call takes `now` (TimestampUs). A `now` earlier than the latest one seen is
// treated as equal to it, so delays and shelving never run backwards (clocks lie; the
// engine is expected to drop late samples before they get here).
// Per-update calls (Update, Tick) never allocate; Acknowledge/Shelve may build a Status
// message on failure. Thread-safety: none; one owner thread (the channel's worker).
// Ownership: a plain value type, copyable.
#pragma once

#include <array>
#include <cstdint>
#include <optional>

#include "core/status.h"
#include "core/time.h"

namespace nightjar::core {

struct AlarmTiming {
  // Seconds ratio >= 1 must hold before a raise. 0 = raise on the first such update.
  // Range [0, 86400].
  double on_delay_s = 0;
  // Seconds ratio < 1 - deadband must hold before a clear. 0 = clear at once.
  // Range [0, 86400].
  double off_delay_s = 0;
  // Clear level below the threshold, as a fraction of it: clear when ratio < 1 - deadband.
  // Range [0, 1).
  double deadband = 0.1;
  // Longest shelving one Shelve() call may ask for, seconds (default 8 h). Forgotten
  // shelved alarms are a known hazard, so shelving always ends on its own.
  // Range (0, 30 days].
  double max_shelve_s = 8 * 3600.0;
  // Raises within chatter_window_s that make the alarm chattering; 0 = off, else
  // [2, kMaxChatterRaises]. Default 3 in an hour (common practice: three returns in a
  // short period is the usual chattering count; the hour suits minutes-long episodes).
  int chatter_raises = 3;
  // Range (0, 86400] s.
  double chatter_window_s = 3600.0;
};
inline constexpr int kMaxChatterRaises = 16;

// OK when every field of `timing` is inside its documented range; otherwise
// InvalidArgument naming the field.
Status ValidateAlarmTiming(const AlarmTiming& timing);

// What an Update (or an un-silencing call) changed in what the operator should see.
enum class AlarmEdge { kNone, kRaise, kClear };

enum class AlarmState {
  kNormal,                  // condition inactive, nothing to acknowledge
  kUnacknowledged,          // condition active, not yet acknowledged
  kAcknowledged,            // condition active, acknowledged
  kReturnedUnacknowledged,  // condition cleared before anyone acknowledged it
  kShelved,                 // silenced by an operator, until a set time
  kSuppressedByDesign,      // silenced by logic (e.g. re-arm after a mode change)
  kOutOfService,            // silenced for maintenance
};

// Stable lower_snake names for the wire: "normal", "unacknowledged", "acknowledged",
// "returned_unacknowledged", "shelved", "suppressed_by_design", "out_of_service".
const char* AlarmStateName(AlarmState state);
// "none", "raise", "clear".
const char* AlarmEdgeName(AlarmEdge edge);

class Alarm {
 public:
  // `timing` must pass ValidateAlarmTiming (asserted); in a release build an invalid
  // field is clamped into its range so behaviour stays defined.
  explicit Alarm(const AlarmTiming& timing = {});

  // Feeds one value of the statistic/threshold ratio observed at `now`. Returns the
  // annunciated edge: kRaise when the condition is raised (Normal or
  // ReturnedUnacknowledged -> Unacknowledged), kClear when it clears (Unacknowledged ->
  // ReturnedUnacknowledged, Acknowledged -> Normal), kNone otherwise and whenever the
  // alarm is silenced.
  //
  // NaN ratio means "no information": the condition, its timers and peak_ratio() are
  // left exactly as they were (a pending on- or off-delay neither restarts nor completes).
  // Only the clock-driven part still runs: see Tick().
  //
  // Shelving expiry is checked here after the ratio has been applied: if now >= the
  // shelve end, the shelving ends and the call returns what Unshelve() would (kRaise if
  // the condition is active and nothing else silences the alarm). So the state after the
  // call always reflects this update's ratio, and one call reports at most one edge.
  AlarmEdge Update(TimestampUs now, double ratio);

  // Time passes with no new information on the condition (same as Update(now, NaN)): only
  // shelving expiry is checked. Lets a periodic tick end shelving on a silent channel.
  AlarmEdge Tick(TimestampUs now);

  // The condition no longer means anything (the channel re-learns at a new operating
  // point): it ends now, without the off-delay, and the alarm returns to Normal with
  // nothing left to acknowledge; shelving, suppression and out-of-service marks stay.
  // kClear when an annunciated active condition ended, kNone otherwise.
  AlarmEdge Withdraw(TimestampUs now);

  // Operator acknowledgement. Unacknowledged -> Acknowledged, ReturnedUnacknowledged ->
  // Normal. FailedPrecondition, state unchanged, in any other state (nothing to
  // acknowledge, or silenced; a shelving past its end but not yet expired by Update or
  // Tick still counts as shelved, so its re-raise is never skipped).
  Status Acknowledge(TimestampUs now);

  // Silences annunciation until `until` (or Unshelve). Allowed in any state; shelving an
  // already shelved alarm replaces the end time. InvalidArgument, nothing changed, unless
  // now < until <= now + max_shelve_s.
  Status Shelve(TimestampUs now, TimestampUs until);
  // Ends shelving now. Returns kRaise if the alarm is thereby annunciated again with its
  // condition active (-> Unacknowledged); kNone otherwise (-> Normal, or still silenced
  // by suppression / out of service, or it was not shelved: a no-op).
  AlarmEdge Unshelve(TimestampUs now);

  // Sets or ends "suppressed by design" / "out of service". Ending the last silencing
  // reason behaves as Unshelve does (kRaise if active); setting one, or ending one while
  // another still holds, returns kNone.
  AlarmEdge SetSuppressedByDesign(bool suppressed);
  AlarmEdge SetOutOfService(bool out_of_service);

  AlarmState state() const;
  // The latched condition: raised and not yet cleared, regardless of silencing.
  bool active() const { return active_; }
  bool shelved() const { return shelved_until_.has_value(); }
  bool suppressed_by_design() const { return suppressed_by_design_; }
  bool out_of_service() const { return out_of_service_; }
  // True in Shelved, SuppressedByDesign and OutOfService.
  bool silenced() const { return shelved() || suppressed_by_design_ || out_of_service_; }

  // When the present condition first reached ratio >= 1: the start of the pending on-delay
  // or, while active, of the run that led to the raise (for "for 40 s" in messages).
  // nullopt when the condition is neither pending nor active.
  std::optional<TimestampUs> condition_since() const { return condition_since_; }
  // Time of the latest raise (kept after the clear for "cleared after ..." messages);
  // nullopt before the first raise.
  std::optional<TimestampUs> raised_at() const { return raised_at_; }
  // Largest ratio of the latest episode, from condition_since() on: it includes the
  // on-delay that led to the raise and runs until the clear; kept after the clear until a
  // new condition starts. 0 before any condition.
  double peak_ratio() const { return peak_ratio_; }
  // The latest raise made the alarm chattering (see the header comment): its clear waits
  // chatter_window_s.
  bool chattering() const { return chattering_; }
  // When shelving ends; nullopt when not shelved.
  std::optional<TimestampUs> shelved_until() const { return shelved_until_; }
  // Time of the latest accepted Acknowledge; nullopt before the first.
  std::optional<TimestampUs> acknowledged_at() const { return acknowledged_at_; }

  const AlarmTiming& timing() const { return timing_; }

 private:
  friend class ChannelStateAccess;  // checkpoints (channel_state.cc)
  // Moves the latched condition; returns which edge of it happened (ignores silencing).
  AlarmEdge TrackCondition(TimestampUs now, double ratio);
  // Records a raise of the condition and whether it makes the alarm chattering.
  void NoteRaise(TimestampUs now);
  // Ends shelving if it is due at `now`; returns the edge of the resulting return.
  AlarmEdge ExpireShelving(TimestampUs now);
  // Called when the last silencing reason has ended: re-derives the annunciated state.
  AlarmEdge Resume();
  // Clamps `now` to the latest time seen and records it.
  TimestampUs Advance(TimestampUs now);

  AlarmTiming timing_;
  TimestampUs on_delay_us_ = 0;
  TimestampUs off_delay_us_ = 0;
  TimestampUs max_shelve_us_ = 0;
  double clear_below_ = 0.9;  // 1 - deadband
  TimestampUs chatter_window_us_ = 0;

  // Annunciated state when not silenced: one of the first four AlarmState values.
  AlarmState annunciated_ = AlarmState::kNormal;
  bool active_ = false;
  std::optional<TimestampUs> condition_since_;
  std::optional<TimestampUs> clear_since_;  // start of the pending off-delay
  std::optional<TimestampUs> raised_at_;
  std::optional<TimestampUs> acknowledged_at_;
  double peak_ratio_ = 0;
  // The latest raises, newest first (the first raise_count_ are set).
  std::array<TimestampUs, kMaxChatterRaises> recent_raises_{};
  int raise_count_ = 0;
  bool chattering_ = false;

  std::optional<TimestampUs> shelved_until_;
  bool suppressed_by_design_ = false;
  bool out_of_service_ = false;

  std::optional<TimestampUs> latest_now_;
};

}  // namespace nightjar::core
