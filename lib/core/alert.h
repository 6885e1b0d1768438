// Alert: what the engine tells the outside world, one raise or one clear at a time.
//
// Plain value type; safe to copy and move between threads. Adapters turn it into
// JSON lines (replay) or MQTT payloads (daemon); the field set is the wire contract.
#pragma once

#include <string>

#include "core/time.h"

namespace nightjar::core {

// What sort of thing happened.
enum class AlertKind {
  kAnomaly,  // the channel departs from its learnt behaviour
  kEvent,    // a known pattern (template) was seen
  kSensor,   // the measurement itself is unusable: stuck, out of range, missing
};

// Which check produced the alert.
enum class Detector {
  kCusum,      // two-sided tabular CUSUM on the standardised residual
  kEwma,       // EWMA chart on the standardised residual
  kSpike,      // a single residual beyond the individual-value limit
  kNotFinite,  // NaN or infinite value
  kRange,      // outside the configured physical range
  kFlatline,   // value stuck for too many samples
  kGap,        // no sample for too long
  kTemplate,   // expected-event template matcher
  kLevel,      // CUSUM or EWMA on the departure from the learnt level (core/level_monitor.h)
};

enum class AlertPhase { kRaise, kClear };

// Priority as used in alarm rationalisation (three levels, ISA-18.2 practice).
enum class Priority { kLow, kMedium, kHigh };

struct Alert {
  TimestampUs time = 0;  // sample time that caused the edge
  std::string channel;   // channel name, e.g. "skid1.pump2.flow"
  AlertKind kind = AlertKind::kAnomaly;
  Detector detector = Detector::kCusum;
  AlertPhase phase = AlertPhase::kRaise;
  double value = 0.0;      // measured value, engineering units (NaN if none)
  double expected = 0.0;   // model's expected value, engineering units (NaN if none)
  double z = 0.0;          // standardised residual (value - expected) / residual scale
  double statistic = 0.0;  // detector statistic at the edge
  double threshold = 0.0;  // the statistic's alarm threshold
  Priority priority = Priority::kMedium;
  std::string message;  // one line for a human

  // Alarm grouping (core/alarm_episodes.h). Set on anomaly alarms of a channel that
  // belongs to an asset; other alerts keep the defaults (annunciated, no episode).
  // False when the edge joins or leaves an episode already annunciated on its asset
  // (suppressed by design): published for dashboards, not for the annunciator.
  bool annunciated = true;
  std::string asset;              // the channel's asset; empty: grouped with no other
  std::string episode_first_out;  // the channel whose raise opened the episode
  TimestampUs episode_since = 0;  // that raise's time
  int episode_active = 0;         // channels of the episode in alarm after this edge
};

// Stable lower-case names used on the wire and in files.
const char* AlertKindName(AlertKind kind);
const char* DetectorName(Detector detector);
const char* AlertPhaseName(AlertPhase phase);
const char* PriorityName(Priority priority);

}  // namespace nightjar::core
