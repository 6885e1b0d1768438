// ISO-8601 UTC timestamps <-> core::TimestampUs (microseconds since the Unix epoch).
//
// Recordings and label files carry wall-clock times as text; the engine works in
// TimestampUs. Accepted text, and nothing else:
//
//   YYYY-MM-DDTHH:MM:SS[.f...]Z        e.g. 2026-03-09T10:54:34Z, 2026-03-09T10:54:34.25Z
//   YYYY-MM-DDTHH:MM:SS[.f...]+00:00   the same instant with an explicit zero offset
//
// Fields have exactly the digits shown; the year is 0000..9999 (proleptic Gregorian),
// the date must exist (leap years included), hours 00..23, minutes and seconds 00..59.
// POSIX time has no leap seconds, so :60 is rejected. The fraction has 1 to 6 digits
// (the resolution is 1 µs; a 7th digit would be silently lost, so it is an error).
// Lowercase t/z, a space instead of T, other offsets and a missing zone are errors:
// a recording whose zone is unknown must not be guessed at.
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
