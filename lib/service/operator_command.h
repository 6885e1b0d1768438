// Operator commands arriving on the command topic, and the replies to them.
//
// A command is one JSON object:
//   {"action": "acknowledge" | "shelve" | "unshelve",   required
//    "channel": "cw2.pump_a.flow",                       required, a channel name
//    "condition": "anomaly",                             optional, default "anomaly"; one of
//                                                        anomaly, not_finite, range, flatline, gap
//    "duration_s": 3600,                                 shelve only, required, > 0 seconds
//    "request_id": "op-17"}                              optional string, echoed in the reply
// Unknown fields are errors (a misspelt "duration" must not shelve for a default time).
//
// The reply, published on the reply topic, is one JSON object:
//   {"request_id": "op-17" | null, "ok": true | false, "action": ..., "channel": ...,
//    "condition": ..., "error": null | "field 'duration_s': must be > 0, got -5"}
// action, channel and condition are null when the command did not get that far.
//
// Thread-safety: pure functions. Ownership: plain values.
#pragma once

#include <optional>
#include <string>
#include <string_view>

#include "core/channel_pipeline.h"
#include "core/status.h"

namespace nightjar::service {

enum class CommandAction { kAcknowledge, kShelve, kUnshelve };
// "acknowledge", "shelve", "unshelve".
const char* CommandActionName(CommandAction action);

struct OperatorCommand {
  CommandAction action = CommandAction::kAcknowledge;
  std::string channel;
  core::AlarmCondition condition = core::AlarmCondition::kAnomaly;
  double duration_s = 0.0;  // shelve only
  std::optional<std::string> request_id;
};

struct ParsedCommand {
  OperatorCommand command;  // complete when status is OK; request_id set whenever readable
  core::Status status;      // InvalidArgument "field 'x': ..." or "not JSON: ..."
  bool has_action = false;  // command.action is valid (for the reply)
  bool has_channel = false;
  bool has_condition = false;
};

ParsedCommand ParseOperatorCommand(std::string_view payload);

// The reply object for `parsed` (ok is parsed.status.ok() && result.ok()).
std::string CommandReplyJson(const ParsedCommand& parsed, const core::Status& result);

}  // namespace nightjar::service
