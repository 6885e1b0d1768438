#include "core/alarm.h"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <limits>
#include <string>

namespace nightjar::core {
namespace {

// Delays beyond a day are almost surely a unit slip (ms typed as s), not a design.
constexpr double kMaxDelayS = 86'400.0;
// Longer than a month is no longer "shelved" but a removal: use out of service.
constexpr double kMaxShelveLimitS = 30 * 86'400.0;

bool InRange(double x, double lo, double hi) { return x >= lo && x <= hi; }  // false on NaN

}  // namespace

Status ValidateAlarmTiming(const AlarmTiming& timing) {
  if (!InRange(timing.on_delay_s, 0.0, kMaxDelayS)) {
    return Status::InvalidArgument("on_delay_s: must be in [0, 86400] s, got " +
                                   std::to_string(timing.on_delay_s));
  }
  if (!InRange(timing.off_delay_s, 0.0, kMaxDelayS)) {
    return Status::InvalidArgument("off_delay_s: must be in [0, 86400] s, got " +
                                   std::to_string(timing.off_delay_s));
  }
  if (!(timing.deadband >= 0.0 && timing.deadband < 1.0)) {
    return Status::InvalidArgument("deadband: must be in [0, 1) of the threshold, got " +
                                   std::to_string(timing.deadband));
  }
  if (!(timing.max_shelve_s > 0.0 && timing.max_shelve_s <= kMaxShelveLimitS)) {
    return Status::InvalidArgument("max_shelve_s: must be in (0, 2592000] s, got " +
                                   std::to_string(timing.max_shelve_s));
  }
  if (timing.chatter_raises != 0 &&
      !(timing.chatter_raises >= 2 && timing.chatter_raises <= kMaxChatterRaises)) {
    return Status::InvalidArgument("chatter_raises: must be 0 (off) or in [2, " +
                                   std::to_string(kMaxChatterRaises) + "], got " +
                                   std::to_string(timing.chatter_raises));
  }
  if (!(timing.chatter_window_s > 0.0 && timing.chatter_window_s <= kMaxDelayS)) {
    return Status::InvalidArgument("chatter_window_s: must be in (0, 86400] s, got " +
                                   std::to_string(timing.chatter_window_s));
  }
  return Status::Ok();
}

const char* AlarmStateName(AlarmState state) {
  switch (state) {
    case AlarmState::kNormal:
      return "normal";
    case AlarmState::kUnacknowledged:
      return "unacknowledged";
    case AlarmState::kAcknowledged:
      return "acknowledged";
    case AlarmState::kReturnedUnacknowledged:
      return "returned_unacknowledged";
    case AlarmState::kShelved:
      return "shelved";
    case AlarmState::kSuppressedByDesign:
      return "suppressed_by_design";
    case AlarmState::kOutOfService:
      return "out_of_service";
  }
  return "unknown";  // only reachable through a cast of a bad integer
}

const char* AlarmEdgeName(AlarmEdge edge) {
  switch (edge) {
    case AlarmEdge::kNone:
      return "none";
    case AlarmEdge::kRaise:
      return "raise";
    case AlarmEdge::kClear:
      return "clear";
  }
  return "unknown";
}

Alarm::Alarm(const AlarmTiming& timing) : timing_(timing) {
  assert(ValidateAlarmTiming(timing).ok());
  // Release builds: clamp (NaN goes to the default) so the arithmetic below is defined.
  auto clamp = [](double x, double lo, double hi, double fallback) {
    return std::isnan(x) ? fallback : std::clamp(x, lo, hi);
  };
  const AlarmTiming defaults;
  timing_.on_delay_s = clamp(timing.on_delay_s, 0.0, kMaxDelayS, defaults.on_delay_s);
  timing_.off_delay_s = clamp(timing.off_delay_s, 0.0, kMaxDelayS, defaults.off_delay_s);
  timing_.deadband = clamp(timing.deadband, 0.0, 0.99, defaults.deadband);
  timing_.max_shelve_s = clamp(timing.max_shelve_s, 1.0, kMaxShelveLimitS, defaults.max_shelve_s);

  timing_.chatter_raises =
      timing.chatter_raises == 0 ? 0 : std::clamp(timing.chatter_raises, 2, kMaxChatterRaises);
  timing_.chatter_window_s =
      clamp(timing.chatter_window_s, 1.0, kMaxDelayS, defaults.chatter_window_s);
  chatter_window_us_ = FromSeconds(timing_.chatter_window_s);
  on_delay_us_ = FromSeconds(timing_.on_delay_s);
  off_delay_us_ = FromSeconds(timing_.off_delay_s);
  max_shelve_us_ = FromSeconds(timing_.max_shelve_s);
  clear_below_ = 1.0 - timing_.deadband;
}

TimestampUs Alarm::Advance(TimestampUs now) {
  if (latest_now_ && now < *latest_now_) now = *latest_now_;
  latest_now_ = now;
  return now;
}

AlarmEdge Alarm::Update(TimestampUs now, double ratio) {
  now = Advance(now);
  const AlarmEdge condition_edge =
      std::isnan(ratio) ? AlarmEdge::kNone : TrackCondition(now, ratio);
  // Expiry after the ratio: a raise or clear in this very update is folded into the state
  // Resume() derives, so one call never has two edges to report.
  if (shelved_until_ && now >= *shelved_until_) return ExpireShelving(now);
  if (silenced()) return AlarmEdge::kNone;

  switch (condition_edge) {
    case AlarmEdge::kRaise:
      // Only Normal or ReturnedUnacknowledged can be inactive when not silenced.
      annunciated_ = AlarmState::kUnacknowledged;
      return AlarmEdge::kRaise;
    case AlarmEdge::kClear:
      annunciated_ = annunciated_ == AlarmState::kAcknowledged
                         ? AlarmState::kNormal
                         : AlarmState::kReturnedUnacknowledged;
      return AlarmEdge::kClear;
    case AlarmEdge::kNone:
      break;
  }
  return AlarmEdge::kNone;
}

AlarmEdge Alarm::Tick(TimestampUs now) {
  return Update(now, std::numeric_limits<double>::quiet_NaN());
}

AlarmEdge Alarm::TrackCondition(TimestampUs now, double ratio) {
  if (!active_) {
    if (ratio < 1.0) {
      condition_since_.reset();  // the on-delay needs the condition without a break
      return AlarmEdge::kNone;
    }
    if (!condition_since_) {
      condition_since_ = now;
      peak_ratio_ = ratio;
    }
    peak_ratio_ = std::max(peak_ratio_, ratio);
    if (now - *condition_since_ < on_delay_us_) return AlarmEdge::kNone;
    active_ = true;
    raised_at_ = now;
    clear_since_.reset();
    NoteRaise(now);
    return AlarmEdge::kRaise;
  }

  peak_ratio_ = std::max(peak_ratio_, ratio);
  if (ratio >= clear_below_) {
    clear_since_.reset();  // inside the deadband or above: still in alarm
    return AlarmEdge::kNone;
  }
  if (!clear_since_) clear_since_ = now;
  const TimestampUs off_delay =
      chattering_ ? std::max(off_delay_us_, chatter_window_us_) : off_delay_us_;
  if (now - *clear_since_ < off_delay) return AlarmEdge::kNone;
  active_ = false;
  condition_since_.reset();
  clear_since_.reset();
  return AlarmEdge::kClear;
}

void Alarm::NoteRaise(TimestampUs now) {
  const int n = timing_.chatter_raises;
  if (n == 0) return;
  for (int i = std::min(raise_count_, n - 1); i > 0; --i) recent_raises_[i] = recent_raises_[i - 1];
  recent_raises_[0] = now;
  raise_count_ = std::min(raise_count_ + 1, n);
  chattering_ = raise_count_ == n && now - recent_raises_[n - 1] <= chatter_window_us_;
}

AlarmEdge Alarm::Withdraw(TimestampUs now) {
  Advance(now);
  const bool annunciated = active_ && !silenced();
  active_ = false;
  condition_since_.reset();
  clear_since_.reset();
  annunciated_ = AlarmState::kNormal;
  raise_count_ = 0;  // the old condition's raises say nothing about the new one
  chattering_ = false;
  return annunciated ? AlarmEdge::kClear : AlarmEdge::kNone;
}

AlarmEdge Alarm::ExpireShelving(TimestampUs now) {
  if (!shelved_until_ || now < *shelved_until_) return AlarmEdge::kNone;
  shelved_until_.reset();
  return silenced() ? AlarmEdge::kNone : Resume();
}

AlarmEdge Alarm::Resume() {
  if (active_) {
    annunciated_ = AlarmState::kUnacknowledged;
    return AlarmEdge::kRaise;
  }
  annunciated_ = AlarmState::kNormal;
  return AlarmEdge::kNone;
}

Status Alarm::Acknowledge(TimestampUs now) {
  // A shelving that is due but not yet expired still counts as shelved: the expiry (and
  // its kRaise) belongs to the next Update or Tick, so the engine never misses that edge.
  now = Advance(now);
  const AlarmState current = state();
  switch (current) {
    case AlarmState::kUnacknowledged:
      annunciated_ = AlarmState::kAcknowledged;
      acknowledged_at_ = now;
      return Status::Ok();
    case AlarmState::kReturnedUnacknowledged:
      annunciated_ = AlarmState::kNormal;
      acknowledged_at_ = now;
      return Status::Ok();
    default:
      break;
  }
  return Status::FailedPrecondition(std::string("nothing to acknowledge: alarm is ") +
                                    AlarmStateName(current));
}

Status Alarm::Shelve(TimestampUs now, TimestampUs until) {
  now = Advance(now);
  if (until <= now) {
    return Status::InvalidArgument("shelve end must be later than now (" + std::to_string(until) +
                                   " <= " + std::to_string(now) + " us)");
  }
  if (until - now > max_shelve_us_) {
    return Status::InvalidArgument("shelve duration " + std::to_string(ToSeconds(until - now)) +
                                   " s exceeds the maximum of " +
                                   std::to_string(timing_.max_shelve_s) + " s");
  }
  shelved_until_ = until;
  return Status::Ok();
}

AlarmEdge Alarm::Unshelve(TimestampUs now) {
  Advance(now);
  if (!shelved_until_) return AlarmEdge::kNone;
  shelved_until_.reset();
  return silenced() ? AlarmEdge::kNone : Resume();
}

AlarmEdge Alarm::SetSuppressedByDesign(bool suppressed) {
  if (suppressed == suppressed_by_design_) return AlarmEdge::kNone;
  suppressed_by_design_ = suppressed;
  return silenced() ? AlarmEdge::kNone : Resume();
}

AlarmEdge Alarm::SetOutOfService(bool out_of_service) {
  if (out_of_service == out_of_service_) return AlarmEdge::kNone;
  out_of_service_ = out_of_service;
  return silenced() ? AlarmEdge::kNone : Resume();
}

AlarmState Alarm::state() const {
  if (out_of_service_) return AlarmState::kOutOfService;
  if (suppressed_by_design_) return AlarmState::kSuppressedByDesign;
  if (shelved_until_) return AlarmState::kShelved;
  return annunciated_;
}

}  // namespace nightjar::core
