#include "service/state_json.h"

#include "core/alert_json.h"
#include "core/timestamp_format.h"

namespace nightjar::service {
namespace {

void AppendTime(std::string_view name, core::TimestampUs t, std::string* out) {
  out->append(",\"").append(name).append("\":\"");
  core::AppendUtcTimestamp(t, core::SecondFraction::kMillis, out);
  out->push_back('"');
}

void AppendCount(std::string_view name, std::uint64_t value, std::string* out) {
  out->append(",\"").append(name).append("\":").append(std::to_string(value));
}

}  // namespace

void ChannelStateJson(std::string_view channel, const core::ChannelStatus& status,
                      core::TimestampUs last_sample_time, std::string* out) {
  out->assign("{\"channel\":");
  core::AppendJsonString(channel, out);
  out->append(",\"state\":");
  core::AppendJsonString(core::ChannelStateName(status.state), out);
  AppendTime("ts", last_sample_time, out);
  out->append(",\"value\":");
  core::AppendJsonNumber(status.last_value, out);
  out->append(",\"expected\":");
  core::AppendJsonNumber(status.last_expected, out);
  out->append(",\"z\":");
  core::AppendJsonNumber(status.last_z, out);
  AppendCount("samples", static_cast<std::uint64_t>(status.samples), out);
  // Learning again at an operating point the model never learnt (ResumeOptions).
  if (status.relearning) out->append(",\"relearning\":true");
  AppendCount("relearns", static_cast<std::uint64_t>(status.relearns), out);
  out->push_back('}');
}

std::string StatusJson(std::string_view state, std::string_view reason, core::TimestampUs since,
                       core::TimestampUs now, const StatusCounters& c) {
  std::string out = "{\"state\":";
  core::AppendJsonString(state, &out);
  if (!reason.empty()) {
    out.append(",\"reason\":");
    core::AppendJsonString(reason, &out);
  }
  AppendTime("since", since, &out);
  AppendTime("updated", now, &out);
  AppendCount("workers", static_cast<std::uint64_t>(c.workers), &out);
  AppendCount("channels", static_cast<std::uint64_t>(c.channels), &out);
  AppendCount("samples", c.samples, &out);
  AppendCount("dropped", c.dropped, &out);
  AppendCount("drop_holes", c.drop_holes, &out);
  AppendCount("bad_payloads", c.bad_payloads, &out);
  AppendCount("unmapped", c.unmapped, &out);
  AppendCount("alerts", c.alerts, &out);
  AppendCount("commands", c.commands, &out);
  AppendCount("reloads", c.reloads, &out);
  AppendCount("reload_failures", c.reload_failures, &out);
  AppendCount("outbox", c.outbox, &out);
  AppendCount("reconnects", c.reconnects, &out);
  if (!c.restart_pending.empty()) {
    out.append(",\"restart_pending\":[");
    for (std::size_t i = 0; i < c.restart_pending.size(); ++i) {
      if (i > 0) out.push_back(',');
      core::AppendJsonString(c.restart_pending[i], &out);
    }
    out.push_back(']');
  }
  out.push_back('}');
  return out;
}

}  // namespace nightjar::service
