// ISO-8601 UTC timestamps <-> core::TimestampUs (microseconds since the Unix epoch).
//
// Recordings and label files carry wall-clock times as text; the engine works in
// TimestampUs. The accepted text is core::ParseUtcTimestamp's (core/timestamp_format.h),
// the one parser shared with MQTT payloads: YYYY-MM-DDTHH:MM:SS[.f...]Z or ...+00:00,
// 1 to 9 fraction digits truncated to whole microseconds; a recording whose zone is
// unknown must not be guessed at.
//
// Thread-safety: pure functions, safe from any thread. Ownership: plain values.
#pragma once

#include <string>
#include <string_view>

#include "core/status.h"
#include "core/time.h"

namespace nightjar::replay {

// Parses `text` as above. On failure InvalidArgument with a reason that quotes the text
// (shortened if long) but names no file or line: the caller adds where it came from.
core::Result<core::TimestampUs> ParseTimestamp(std::string_view text);

// Formats `t` as YYYY-MM-DDTHH:MM:SSZ, with ".ffffff" (always six digits) before the Z
// when t is not a whole second (core::FormatUtcTimestamp with kMicrosIfAny, see
// core/timestamp_format.h). ParseTimestamp(FormatTimestamp(t)) == t for every t in
// years 0000..9999. Every TimestampUs formats without overflow; outside those years the
// year is written as printf's %04lld would (e.g. -001, 12345), which ParseTimestamp rejects.
std::string FormatTimestamp(core::TimestampUs t);

}  // namespace nightjar::replay
