// JSON bodies of the retained topics: one channel's state, and the daemon's status.
//
// Channel state (retained on <state_prefix>/<channel as topic>):
//   {"channel":"cw2.pump_a.flow","state":"in_alarm","ts":"2026-03-09T10:54:34.250Z",
//    "value":101.3,"expected":96.2,"z":5.1,"samples":5400}
// state is learning | armed | in_alarm | stale (core::ChannelStateName); ts is the time of
// the channel's latest sample; value, expected, z are from it (null when not finite).
//
// Daemon status (retained on the status topic): {"state":"online"|"offline", ...counters};
// see StatusCounters for the fields, written in that order; restart_pending as an array of
// key path strings, written only when not empty.
//
// Thread-safety: pure functions. Ownership: plain values.
#pragma once

#include <cstdint>
#include <string>
#include <string_view>
#include <vector>

#include "core/channel_pipeline.h"
#include "core/time.h"

namespace nightjar::service {

// Writes the channel state object into *out (cleared first).
void ChannelStateJson(std::string_view channel, const core::ChannelStatus& status,
                      core::TimestampUs last_sample_time, std::string* out);

struct StatusCounters {
  std::int64_t workers = 0;
  std::int64_t channels = 0;          // channels the engines know
  std::uint64_t samples = 0;          // samples processed by the engines
  std::uint64_t dropped = 0;          // samples dropped at a full worker queue
  std::uint64_t drop_holes = 0;       // holes those drops left in channel streams (no gap alarm)
  std::uint64_t bad_payloads = 0;     // messages whose payload did not parse
  std::uint64_t unmapped = 0;         // messages on topics no subscription maps
  std::uint64_t alerts = 0;           // alerts published (raises and clears)
  std::uint64_t commands = 0;         // operator commands received
  std::uint64_t reloads = 0;          // config reloads applied
  std::uint64_t reload_failures = 0;  // reloads refused (invalid config)
  std::uint64_t outbox = 0;           // publishes waiting for the broker
  std::uint64_t reconnects = 0;       // broker reconnects
  // mqtt: and daemon: key paths a reload changed that apply at the next start only.
  std::vector<std::string> restart_pending;
};

// {"state":<state>,"reason":<reason or omitted>,"since":<start time>,"updated":<now>, counters}.
std::string StatusJson(std::string_view state, std::string_view reason, core::TimestampUs since,
                       core::TimestampUs now, const StatusCounters& counters);

}  // namespace nightjar::service
