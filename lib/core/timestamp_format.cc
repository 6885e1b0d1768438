#include "core/timestamp_format.h"

#include <array>
#include <cstddef>
#include <cstdio>

namespace nightjar::core {
namespace {

constexpr std::int64_t kSecondsPerDayInt = 86'400;
constexpr std::int64_t kMicrosPerDay = kSecondsPerDayInt * kMicrosPerSecond;
constexpr std::int64_t kMicrosPerMilli = 1'000;
constexpr std::size_t kMicroDigits = 6;
constexpr std::size_t kMaxFractionDigits = 9;

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

int DaysInMonth(int year, int month) {
  static constexpr std::array<int, 12> kDays = {31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31};
  const bool leap = (year % 4 == 0 && year % 100 != 0) || year % 400 == 0;
  return month == 2 && leap ? 29 : kDays[static_cast<std::size_t>(month - 1)];
}

}  // namespace

// Days counted in 400-year eras (146097 days each) whose years start on 1 March, so
// the leap day falls at the end of a year (H. Hinnant, days_from_civil).
std::int64_t DaysFromCivil(std::int64_t year, int month, int day) {
  year -= month <= 2 ? 1 : 0;
  const std::int64_t era = (year >= 0 ? year : year - 399) / 400;
  const std::int64_t year_of_era = year - era * 400;
  const std::int64_t month_from_march = month > 2 ? month - 3 : month + 9;
  const std::int64_t day_of_year = (153 * month_from_march + 2) / 5 + day - 1;
  const std::int64_t day_of_era =
      year_of_era * 365 + year_of_era / 4 - year_of_era / 100 + day_of_year;
  return era * 146097 + day_of_era - 719468;
}

// H. Hinnant, civil_from_days.
CivilDate CivilFromDays(std::int64_t days) {
  days += 719468;
  const std::int64_t era = (days >= 0 ? days : days - 146096) / 146097;
  const std::int64_t day_of_era = days - era * 146097;
  const std::int64_t year_of_era =
      (day_of_era - day_of_era / 1460 + day_of_era / 36524 - day_of_era / 146096) / 365;
  const std::int64_t day_of_year =
      day_of_era - (365 * year_of_era + year_of_era / 4 - year_of_era / 100);
  const std::int64_t month_from_march = (5 * day_of_year + 2) / 153;
  const int day = static_cast<int>(day_of_year - (153 * month_from_march + 2) / 5 + 1);
  const int month =
      static_cast<int>(month_from_march < 10 ? month_from_march + 3 : month_from_march - 9);
  const std::int64_t year = year_of_era + era * 400 + (month <= 2 ? 1 : 0);
  return {year, month, day};
}

void AppendUtcTimestamp(TimestampUs t, SecondFraction fraction, std::string* out) {
  // Floor division so times before 1970 land on the right day.
  std::int64_t days = t / kMicrosPerDay;
  std::int64_t micros_of_day = t % kMicrosPerDay;
  if (micros_of_day < 0) {
    micros_of_day += kMicrosPerDay;
    --days;
  }
  const CivilDate date = CivilFromDays(days);
  const std::int64_t second_of_day = micros_of_day / kMicrosPerSecond;
  const std::int64_t micros = micros_of_day % kMicrosPerSecond;
  const int hour = static_cast<int>(second_of_day / 3600);
  const int minute = static_cast<int>(second_of_day / 60 % 60);
  const int second = static_cast<int>(second_of_day % 60);

  // 64 bytes hold the longest case: a 20-character year of INT64_MIN's range and more.
  std::array<char, 64> buffer{};
  int n =
      std::snprintf(buffer.data(), buffer.size(), "%04lld-%02d-%02dT%02d:%02d:%02d",
                    static_cast<long long>(date.year), date.month, date.day, hour, minute, second);
  if (n < 0) n = 0;
  const auto room = [&n, &buffer] { return buffer.size() - static_cast<std::size_t>(n); };
  int more = 0;
  if (fraction == SecondFraction::kMillis) {
    more = std::snprintf(buffer.data() + n, room(), ".%03lld",
                         static_cast<long long>(micros / kMicrosPerMilli));
  } else if (micros != 0) {
    more = std::snprintf(buffer.data() + n, room(), ".%06lld", static_cast<long long>(micros));
  }
  if (more > 0) n += more;
  out->append(buffer.data(), static_cast<std::size_t>(n));
  out->push_back('Z');
}

Result<TimestampUs> ParseUtcTimestamp(std::string_view text) {
  const auto bad = [](const char* why) { return Status::InvalidArgument(why); };
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
    return bad("want YYYY-MM-DDTHH:MM:SS[.fff]Z or ...+00:00");
  }
  if (month < 1 || month > 12) return bad("month out of range 01..12");
  if (day < 1 || day > DaysInMonth(year, month)) return bad("no such day in that month");
  if (hour > 23) return bad("hour out of range 00..23");
  if (minute > 59) return bad("minute out of range 00..59");
  if (second > 59) return bad("second out of range 00..59 (no leap seconds)");

  std::size_t pos = 19;
  std::int64_t micros = 0;
  if (pos < text.size() && text[pos] == '.') {
    ++pos;
    std::size_t digits = 0;
    while (pos < text.size() && IsDigit(text[pos])) {
      if (++digits > kMaxFractionDigits) return bad("more than 9 fraction digits");
      if (digits <= kMicroDigits) micros = micros * 10 + (text[pos] - '0');  // truncates
      ++pos;
    }
    if (digits == 0) return bad("no digits after '.'");
    for (std::size_t i = digits; i < kMicroDigits; ++i) micros *= 10;
  }
  const std::string_view zone = text.substr(pos);
  if (zone.empty()) return bad("no zone: end with Z or +00:00 (times are UTC)");
  if (zone != "Z" && zone != "+00:00") return bad("zone must be Z or +00:00 (times are UTC)");

  const std::int64_t seconds = DaysFromCivil(year, month, day) * kSecondsPerDayInt +
                               std::int64_t{hour} * 3600 + std::int64_t{minute} * 60 + second;
  return seconds * kMicrosPerSecond + micros;
}

std::string FormatUtcTimestamp(TimestampUs t, SecondFraction fraction) {
  std::string out;
  AppendUtcTimestamp(t, fraction, &out);
  return out;
}

}  // namespace nightjar::core
