#include "core/timestamp_format.h"

#include <array>
#include <cstdio>

namespace nightjar::core {
namespace {

constexpr std::int64_t kSecondsPerDayInt = 86'400;
constexpr std::int64_t kMicrosPerDay = kSecondsPerDayInt * kMicrosPerSecond;
constexpr std::int64_t kMicrosPerMilli = 1'000;

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

std::string FormatUtcTimestamp(TimestampUs t, SecondFraction fraction) {
  std::string out;
  AppendUtcTimestamp(t, fraction, &out);
  return out;
}

}  // namespace nightjar::core
