#include "mqtt/bad_payload_log.h"

#include <cassert>
#include <cmath>

namespace nightjar::mqtt {

core::Status ValidateBadPayloadLogOptions(const BadPayloadLogOptions& options) {
  if (!(std::isfinite(options.interval_s) && options.interval_s > 0.0)) {
    return core::Status::InvalidArgument("interval_s: must be finite and > 0, got " +
                                         std::to_string(options.interval_s));
  }
  if (options.max_channels < 1) {
    return core::Status::InvalidArgument("max_channels: must be >= 1, got 0");
  }
  return core::Status::Ok();
}

BadPayloadLog::BadPayloadLog(BadPayloadLogOptions options) : options_(options) {
  const bool valid = ValidateBadPayloadLogOptions(options_).ok();
  assert(valid && "BadPayloadLog options must be validated first");
  if (!valid) options_ = BadPayloadLogOptions{};
  interval_us_ = core::FromSeconds(options_.interval_s);
  if (interval_us_ < 1) interval_us_ = 1;
}

BadPayloadLog::Decision BadPayloadLog::Record(std::string_view channel, core::TimestampUs now) {
  ++total_;
  auto it = entries_.find(channel);
  if (it == entries_.end()) {
    const std::string_view key = entries_.size() < options_.max_channels ? channel : kOtherChannels;
    it = entries_.find(key);
    if (it == entries_.end()) {
      it = entries_.emplace(std::string(key), Entry{}).first;
      Entry& first = it->second;
      first.count = 1;
      first.last_report = now;
      return Decision{.log_now = true, .suppressed = 0, .total = 1};
    }
  }
  Entry& entry = it->second;
  ++entry.count;
  if (now < entry.last_report) {  // the clock stepped back: restart the window quietly
    entry.last_report = now;
    ++entry.unreported;
    return Decision{.log_now = false, .suppressed = 0, .total = entry.count};
  }
  if (now - entry.last_report >= interval_us_) {
    const Decision decision{.log_now = true, .suppressed = entry.unreported, .total = entry.count};
    entry.unreported = 0;
    entry.last_report = now;
    return decision;
  }
  ++entry.unreported;
  return Decision{.log_now = false, .suppressed = 0, .total = entry.count};
}

std::uint64_t BadPayloadLog::count(std::string_view channel) const {
  const auto it = entries_.find(channel);
  return it == entries_.end() ? 0 : it->second.count;
}

std::vector<std::pair<std::string, std::uint64_t>> BadPayloadLog::Counts() const {
  std::vector<std::pair<std::string, std::uint64_t>> out;
  out.reserve(entries_.size());
  for (const auto& [channel, entry] : entries_) out.emplace_back(channel, entry.count);
  return out;
}

}  // namespace nightjar::mqtt
