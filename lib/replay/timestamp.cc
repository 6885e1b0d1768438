#include "replay/timestamp.h"

#include <cstddef>
#include <string>

#include "core/timestamp_format.h"

namespace nightjar::replay {
namespace {

constexpr std::size_t kMaxQuoted = 48;  // longer texts are shortened in error messages

core::Status Bad(std::string_view text, std::string_view why) {
  std::string quoted(text.substr(0, kMaxQuoted));
  if (text.size() > kMaxQuoted) quoted += "...";
  return core::Status::InvalidArgument("bad timestamp '" + quoted + "': " + std::string(why));
}

}  // namespace

core::Result<core::TimestampUs> ParseTimestamp(std::string_view text) {
  core::Result<core::TimestampUs> parsed = core::ParseUtcTimestamp(text);
  if (!parsed.ok()) return Bad(text, parsed.status().message());
  return parsed;
}

std::string FormatTimestamp(core::TimestampUs t) {
  return core::FormatUtcTimestamp(t, core::SecondFraction::kMicrosIfAny);
}

}  // namespace nightjar::replay
