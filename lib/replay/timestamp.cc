#include "replay/timestamp.h"

#include <array>
#include <cstdint>

#include "core/timestamp_format.h"

namespace nightjar::replay {
namespace {

constexpr std::int64_t kSecondsPerDay = 86'400;
constexpr std::size_t kMaxQuoted = 48;  // longer texts are shortened in error messages

bool IsLeapYear(std::int64_t year) { return (year % 4 == 0 && year % 100 != 0) || year % 400 == 0; }

int DaysInMonth(std::int64_t year, int month) {
  static constexpr std::array<int, 12> kDays = {31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31};
  return month == 2 && IsLeapYear(year) ? 29 : kDays[static_cast<std::size_t>(month - 1)];
}

bool IsDigit(char c) { return c >= '0' && c <= '9'; }

// Reads `count` digits at text[pos]; false if any is not a digit or text is too short.
bool ReadDigits(std::string_view text, std::size_t pos, std::size_t count, int* value) {
  if (pos + count > text.size()) return false;
  int v = 0;
  for (std::size_t i = pos; i < pos + count; ++i) {
    if (!IsDigit(text[i])) return false;
    v = v * 10 + (text[i] - '0');
  }
  *value = v;
  return true;
}

core::Status Bad(std::string_view text, std::string_view why) {
  std::string quoted(text.substr(0, kMaxQuoted));
  if (text.size() > kMaxQuoted) quoted += "...";
  return core::Status::InvalidArgument("bad timestamp '" + quoted + "': " + std::string(why));
}

}  // namespace

core::Result<core::TimestampUs> ParseTimestamp(std::string_view text) {
  constexpr std::string_view kWant = "want YYYY-MM-DDTHH:MM:SS[.ffffff]Z or ...+00:00";
  int year = 0;
  int month = 0;
  int day = 0;
  int hour = 0;
  int minute = 0;
  int second = 0;
  // Fixed layout of the first 19 characters: YYYY-MM-DDTHH:MM:SS.
  if (text.size() < 19 || !ReadDigits(text, 0, 4, &year) || text[4] != '-' ||
      !ReadDigits(text, 5, 2, &month) || text[7] != '-' || !ReadDigits(text, 8, 2, &day) ||
      text[10] != 'T' || !ReadDigits(text, 11, 2, &hour) || text[13] != ':' ||
      !ReadDigits(text, 14, 2, &minute) || text[16] != ':' || !ReadDigits(text, 17, 2, &second)) {
    return Bad(text, kWant);
  }
  if (month < 1 || month > 12) return Bad(text, "month out of range 01..12");
  if (day < 1 || day > DaysInMonth(year, month)) return Bad(text, "no such day in that month");
  if (hour > 23) return Bad(text, "hour out of range 00..23");
  if (minute > 59) return Bad(text, "minute out of range 00..59");
  if (second > 59) return Bad(text, "second out of range 00..59 (no leap seconds)");

  std::size_t pos = 19;
  std::int64_t micros = 0;
  if (pos < text.size() && text[pos] == '.') {
    ++pos;
    std::size_t digits = 0;
    while (pos < text.size() && IsDigit(text[pos])) {
      if (++digits > 6) return Bad(text, "more than 6 fractional digits (resolution is 1 us)");
      micros = micros * 10 + (text[pos] - '0');
      ++pos;
    }
    if (digits == 0) return Bad(text, "no digits after '.'");
    for (std::size_t i = digits; i < 6; ++i) micros *= 10;
  }
  const std::string_view zone = text.substr(pos);
  if (zone.empty()) return Bad(text, "no zone: end with Z or +00:00 (times are UTC)");
  if (zone != "Z" && zone != "+00:00") return Bad(text, "zone must be Z or +00:00 (times are UTC)");

  const std::int64_t seconds = core::DaysFromCivil(year, month, day) * kSecondsPerDay +
                               std::int64_t{hour} * 3600 + std::int64_t{minute} * 60 + second;
  return seconds * core::kMicrosPerSecond + micros;
}

std::string FormatTimestamp(core::TimestampUs t) {
  return core::FormatUtcTimestamp(t, core::SecondFraction::kMicrosIfAny);
}

}  // namespace nightjar::replay
