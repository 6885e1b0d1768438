// ISO-8601 UTC text for core::TimestampUs, and the civil-date arithmetic behind it.
//
// Alerts leave the core as JSON (alert_json.h) and recordings name their instants in
// ISO-8601 UTC, so the formatting lives here, beside the time type, for every module
// to share. Dates are proleptic Gregorian; POSIX time has no leap seconds. The date
// conversions are H. Hinnant's days_from_civil / civil_from_days algorithms ("chrono-
// Compatible Low-Level Date Algorithms"), exact for every 64-bit day count used here.
//
// Thread-safety: pure functions, safe from any thread. Ownership: plain values.
// No allocation except the returned or appended string.
#pragma once

#include <cstdint>
#include <string>

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

}  // namespace nightjar::core
