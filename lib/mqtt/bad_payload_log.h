// BadPayloadLog: counts bad payloads per channel and rate-limits reporting them.
//
// A sensor gateway with a broken firmware can send thousands of malformed payloads a
// minute; logging each one would flood the journal, and alarming on each one would be an
// alarm storm. The daemon calls Record() for every bad payload; Record() counts it and
// says whether to write a log line now: at most once per `interval_s` per channel, the
// first time at once, later lines carrying how many were counted quietly in between.
// Totals per channel stay available for the periodic report.
//
// Time is the caller's (usually the arrival time); nothing here reads a clock. If time
// steps backwards, the channel's window restarts at the new time without a report, so a
// clock step can neither flood nor silence the log for long.
//
// Memory is bounded: after max_channels distinct channels, further channels are counted
// together under kOtherChannels (a bad topic must not grow the table without bound).
//
// Thread-safety: none; one owner (the intake guards it with its lock). Ownership: plain
// value; returned strings are copies.
#pragma once

#include <cstddef>
#include <cstdint>
#include <map>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

#include "core/status.h"
#include "core/time.h"

namespace nightjar::mqtt {

struct BadPayloadLogOptions {
  // Least time between two reports for one channel, seconds, > 0. Default 60.
  double interval_s = 60.0;
  // Distinct channels counted one by one, >= 1; the rest share kOtherChannels.
  // Default 4096.
  std::size_t max_channels = 4096;
};

// OK, or InvalidArgument naming the field.
core::Status ValidateBadPayloadLogOptions(const BadPayloadLogOptions& options);

class BadPayloadLog {
 public:
  // The key that channels beyond max_channels are counted under.
  static constexpr std::string_view kOtherChannels = "(other channels)";

  struct Decision {
    bool log_now = false;          // write one log line for this payload now
    std::uint64_t suppressed = 0;  // when log_now: bad payloads not reported since the last line
    std::uint64_t total = 0;       // bad payloads counted on this channel so far, this one included
  };

  // `options` must pass ValidateBadPayloadLogOptions (asserted; defaults used otherwise).
  explicit BadPayloadLog(BadPayloadLogOptions options = {});

  // Counts one bad payload on `channel` at `now` and decides whether to log it.
  Decision Record(std::string_view channel, core::TimestampUs now);

  // Bad payloads counted on `channel` (0 if none).
  std::uint64_t count(std::string_view channel) const;
  // Bad payloads counted on all channels.
  std::uint64_t total() const { return total_; }
  // (channel, count) for every channel counted, sorted by channel name.
  std::vector<std::pair<std::string, std::uint64_t>> Counts() const;

 private:
  struct Entry {
    std::uint64_t count = 0;
    std::uint64_t unreported = 0;  // counted since the last report
    core::TimestampUs last_report = 0;
  };

  BadPayloadLogOptions options_;
  core::TimestampUs interval_us_;
  std::map<std::string, Entry, std::less<>> entries_;
  std::uint64_t total_ = 0;
};

}  // namespace nightjar::mqtt
