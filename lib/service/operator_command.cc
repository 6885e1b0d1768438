#include "service/operator_command.h"

#include <cmath>
#include <nlohmann/json.hpp>
#include <string>

#include "core/alert_json.h"

namespace nightjar::service {
namespace {

using Json = nlohmann::json;

core::Status FieldError(std::string_view field, std::string_view what) {
  return core::Status::InvalidArgument("field '" + std::string(field) + "': " + std::string(what));
}

const char* JsonKind(const Json& value) {
  switch (value.type()) {
    case Json::value_t::null:
      return "null";
    case Json::value_t::boolean:
      return "a boolean";
    case Json::value_t::string:
      return "a string";
    case Json::value_t::object:
      return "an object";
    case Json::value_t::array:
      return "an array";
    default:
      return "a number";
  }
}

}  // namespace

const char* CommandActionName(CommandAction action) {
  switch (action) {
    case CommandAction::kAcknowledge:
      return "acknowledge";
    case CommandAction::kShelve:
      return "shelve";
    case CommandAction::kUnshelve:
      return "unshelve";
  }
  return "unknown";
}

ParsedCommand ParseOperatorCommand(std::string_view payload) {
  ParsedCommand out;
  Json doc = Json::parse(payload, nullptr, /*allow_exceptions=*/false);
  if (doc.is_discarded()) {
    out.status = core::Status::InvalidArgument("not JSON");
    return out;
  }
  if (!doc.is_object()) {
    out.status =
        core::Status::InvalidArgument(std::string("expected a JSON object, got ") + JsonKind(doc));
    return out;
  }
  // request_id first, so that every later error can still be matched to its request.
  if (const auto it = doc.find("request_id"); it != doc.end()) {
    if (!it->is_string()) {
      out.status = FieldError("request_id", std::string("expected a string, got ") + JsonKind(*it));
      return out;
    }
    out.command.request_id = it->get<std::string>();
  }
  for (const auto& [key, value] : doc.items()) {
    if (key != "action" && key != "channel" && key != "condition" && key != "duration_s" &&
        key != "request_id") {
      out.status = FieldError(key,
                              "unknown field (expected action, channel, condition, "
                              "duration_s, request_id)");
      return out;
    }
  }
  const auto action = doc.find("action");
  if (action == doc.end()) {
    out.status = FieldError("action", "missing");
    return out;
  }
  const std::string action_text = action->is_string() ? action->get<std::string>() : "";
  if (action_text == "acknowledge") {
    out.command.action = CommandAction::kAcknowledge;
  } else if (action_text == "shelve") {
    out.command.action = CommandAction::kShelve;
  } else if (action_text == "unshelve") {
    out.command.action = CommandAction::kUnshelve;
  } else {
    out.status = FieldError("action", "expected one of acknowledge, shelve, unshelve, got " +
                                          (action->is_string() ? "'" + action_text + "'"
                                                               : std::string(JsonKind(*action))));
    return out;
  }
  out.has_action = true;

  const auto channel = doc.find("channel");
  if (channel == doc.end()) {
    out.status = FieldError("channel", "missing");
    return out;
  }
  if (!channel->is_string() || channel->get<std::string>().empty()) {
    out.status = FieldError("channel", std::string("expected a channel name, got ") +
                                           (channel->is_string() ? "\"\"" : JsonKind(*channel)));
    return out;
  }
  out.command.channel = channel->get<std::string>();
  out.has_channel = true;

  if (const auto condition = doc.find("condition"); condition != doc.end()) {
    if (!condition->is_string() ||
        !core::ParseAlarmCondition(condition->get<std::string>(), &out.command.condition)) {
      out.status = FieldError(
          "condition", "expected one of anomaly, not_finite, range, flatline, gap, got " +
                           (condition->is_string() ? "'" + condition->get<std::string>() + "'"
                                                   : std::string(JsonKind(*condition))));
      return out;
    }
  }
  out.has_condition = true;

  const auto duration = doc.find("duration_s");
  if (out.command.action == CommandAction::kShelve) {
    if (duration == doc.end()) {
      out.status = FieldError("duration_s", "missing: shelve needs a duration in seconds");
      return out;
    }
    if (!duration->is_number()) {
      out.status = FieldError(
          "duration_s", std::string("expected a number of seconds, got ") + JsonKind(*duration));
      return out;
    }
    out.command.duration_s = duration->get<double>();
    if (!std::isfinite(out.command.duration_s) || out.command.duration_s <= 0.0) {
      out.status = FieldError("duration_s", "must be > 0, got " + duration->dump());
      return out;
    }
  } else if (duration != doc.end()) {
    out.status = FieldError("duration_s", std::string("only for shelve, not ") + action_text);
    return out;
  }
  return out;
}

std::string CommandReplyJson(const ParsedCommand& parsed, const core::Status& result) {
  const bool ok = parsed.status.ok() && result.ok();
  std::string out = "{\"request_id\":";
  if (parsed.command.request_id) {
    core::AppendJsonString(*parsed.command.request_id, &out);
  } else {
    out += "null";
  }
  out += ok ? ",\"ok\":true" : ",\"ok\":false";
  out += ",\"action\":";
  if (parsed.has_action) {
    core::AppendJsonString(CommandActionName(parsed.command.action), &out);
  } else {
    out += "null";
  }
  out += ",\"channel\":";
  if (parsed.has_channel) {
    core::AppendJsonString(parsed.command.channel, &out);
  } else {
    out += "null";
  }
  out += ",\"condition\":";
  if (parsed.has_condition) {
    core::AppendJsonString(core::AlarmConditionName(parsed.command.condition), &out);
  } else {
    out += "null";
  }
  out += ",\"error\":";
  if (ok) {
    out += "null";
  } else {
    core::AppendJsonString(parsed.status.ok() ? result.message() : parsed.status.message(), &out);
  }
  out += "}";
  return out;
}

}  // namespace nightjar::service
