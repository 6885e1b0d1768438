// Alert -> one JSON object: the wire form of an alert, written by replay (one object per
// line of alerts.jsonl) and published by the daemon. Standard library only.
//
//   {"ts":"2026-03-09T10:54:34.250Z","channel":"cw2.pump_a.flow","kind":"anomaly",
//    "detector":"cusum","phase":"raise","value":101.3,"expected":96.2,"z":5.1,
//    "statistic":6.2,"threshold":5.9,"priority":"medium","message":"...",
//    "annunciated":true,"episode":{"asset":"cw2.pump_a","first_out":"cw2.pump_a.flow",
//    "since":"2026-03-09T10:54:34.250Z","active":1}}
//
// Fields, always all present and in this order:
//   ts         Alert::time as ISO-8601 UTC with milliseconds (rounded down) and "Z"
//   channel    the channel name
//   kind, detector, phase, priority   the wire names of alert.h (AlertKindName, ...)
//   value, expected, z, statistic, threshold   numbers; null when not finite (NaN, Inf)
//   message    the one-line human text
//   annunciated  true, or false for an anomaly edge that joins or leaves an episode
//              already annunciated on its asset (core/alarm_episodes.h)
//   episode    null, or for an anomaly alarm of a grouped channel
//              {"asset":..., "first_out": channel or null, "since": ts or null,
//               "active": channels of the episode in alarm after this edge}
//              (first_out and since are null on a clear that belongs to no episode)
// Numbers are written in the shortest form that reads back to the same double
// (std::to_chars). Strings are escaped as RFC 8259 requires ('"', '\\', control
// characters); valid UTF-8 passes through unchanged, and each ill-formed UTF-8 sequence
// (a maximal invalid subpart) becomes U+FFFD, so the output is always valid JSON.
//
// Thread-safety: pure functions, safe from any thread. Ownership: plain values.
#pragma once

#include <string>
#include <string_view>

#include "core/alert.h"

namespace nightjar::core {

// Appends the object for `alert` to *out, without a line end.
void AppendAlertJson(const Alert& alert, std::string* out);
std::string AlertToJson(const Alert& alert);

// Building blocks, shared with other JSON writers (the replay summary).
// Appends `text` as a quoted, escaped JSON string.
void AppendJsonString(std::string_view text, std::string* out);
// Appends `value` as a JSON number, or null when it is not finite.
void AppendJsonNumber(double value, std::string* out);

}  // namespace nightjar::core
