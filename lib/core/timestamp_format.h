// ISO-8601 UTC text <-> core::TimestampUs, and the civil-date arithmetic behind it.
//
// Alerts leave the core as JSON (alert_json.h), and recordings, label files and MQTT
// payloads name their instants in ISO-8601 UTC, so the formatting and the one parser
// live here, beside the time type, for every module to share. Dates are proleptic Gregorian; POSIX
// time has no leap seconds. The date conversions are H. Hinnant's days_from_civil / civil_from_days
// algorithms ("chrono- Compatible Low-Level Date Algorithms"), exact for every 64-bit day count
// used here.
//
// Thread-safety: pure functions, safe from any thread. Ownership: plain values.
// No allocation except the returned or appended string.
#pragma once

#include <cstdint>
#include <string>
#include <string_view>

#include "core/status.h"
#include "core/time.h"

namespace nightjar::core {

// A proleptic Gregorian calendar date.
struct CivilDate {
  std::int64_t year = 1970;
  int month = 1;  // 1..12
  int day = 1;    // 1..31
};

// Days since 1970-01-01 of a date (negative before it). month 1..12, day 1..31; the
// day is not checked against the month's length (31 February is 3 March).
std::int64_t DaysFromCivil(std::int64_t year, int month, int day);

// Inverse of DaysFromCivil for every day count whose year fits an int64.
CivilDate CivilFromDays(std::int64_t days);

// How many fractional-second digits FormatUtcTimestamp writes.
enum class SecondFraction {
  kMicrosIfAny,  // none for a whole second, else always six: ".250000"
  kMillis,       // always three, rounded down (towards the past): ".250"
};

// Formats `t` as YYYY-MM-DDTHH:MM:SS[.fff|.ffffff]Z. Every TimestampUs formats without
// overflow; outside years 0000..9999 the year is written as printf's "%04lld" would
// (e.g. "-001", "12345"), which is not valid ISO-8601 without an agreed expansion.
std::string FormatUtcTimestamp(TimestampUs t, SecondFraction fraction);

// Appends the same text to *out.
void AppendUtcTimestamp(TimestampUs t, SecondFraction fraction, std::string* out);

// Parses an RFC 3339 / ISO-8601 UTC instant. Accepted text, and nothing else:
//
//   YYYY-MM-DDTHH:MM:SS[.f...]Z        e.g. 2026-03-09T10:54:34Z, 2026-03-09T10:54:34.25Z
//   YYYY-MM-DDTHH:MM:SS[.f...]+00:00   the same instant with an explicit zero offset
//
// Fields have exactly the digits shown; the year is 0000..9999 (proleptic Gregorian),
// the date must exist, hours 00..23, minutes and seconds 00..59 (POSIX time has no leap
// seconds, so :60 is rejected). The fraction has 1 to 9 digits (up to nanoseconds, as
// many clocks write them); digits past the sixth are TRUNCATED, never rounded, so the
// result is the whole microsecond at or before the instant written (".1234569" ->
// 123456 us) and a time never moves into the next second. Lowercase t/z, a space for T,
// other offsets and a missing zone are errors: an unknown zone must not be guessed at.
//
// On failure InvalidArgument whose message is only the reason (e.g. "no such day in that
// month"), neither quoting the text nor naming where it came from: callers add both.
Result<TimestampUs> ParseUtcTimestamp(std::string_view text);

}  // namespace nightjar::core
