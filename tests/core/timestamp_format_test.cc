// core::ParseUtcTimestamp, the one ISO-8601 UTC parser (recordings, labels, MQTT).
//
// Worked examples: RFC 3339 "Date and Time on the Internet: Timestamps", section 5.8
// "Examples". Their epoch values follow the POSIX definition of seconds since the Epoch
// (IEEE Std 1003.1, Base Definitions 4.16) and were checked with Python's datetime
// (datetime(..., tzinfo=timezone.utc).timestamp()).
#include "core/timestamp_format.h"

#include <gtest/gtest.h>

#include <string>
#include <vector>

namespace nightjar::core {
namespace {

constexpr TimestampUs kUs = kMicrosPerSecond;

TimestampUs ParseOk(const std::string& text) {
  Result<TimestampUs> t = ParseUtcTimestamp(text);
  EXPECT_TRUE(t.ok()) << text << ": " << t.status().message();
  return t.ok() ? *t : -1;
}

std::string Reason(const std::string& text) {
  Result<TimestampUs> t = ParseUtcTimestamp(text);
  EXPECT_FALSE(t.ok()) << "accepted '" << text << "'";
  return t.ok() ? std::string() : t.status().message();
}

TEST(ParseUtcTimestampTest, Rfc3339Section58Examples) {
  // "1985-04-12T23:20:50.52Z": 20 minutes and 50.52 seconds after the 23rd hour of
  // April 12th, 1985 in UTC.
  EXPECT_EQ(ParseOk("1985-04-12T23:20:50.52Z"), 482196050 * kUs + 520000);
  // "1996-12-19T16:39:57-08:00" is 1996-12-20T00:39:57Z; only UTC is accepted here, so
  // the offset form is refused and its UTC equivalent parses.
  EXPECT_NE(Reason("1996-12-19T16:39:57-08:00").find("zone must be Z or +00:00"),
            std::string::npos);
  EXPECT_EQ(ParseOk("1996-12-20T00:39:57Z"), 851042397 * kUs);
  // "1990-12-31T23:59:60Z" is a leap second; POSIX time has none, so it is refused.
  EXPECT_NE(Reason("1990-12-31T23:59:60Z").find("no leap seconds"), std::string::npos);
  EXPECT_FALSE(ParseUtcTimestamp("1990-12-31T15:59:60-08:00").ok());
  // "1937-01-01T12:00:27.87+00:20" (Netherlands time) is 1937-01-01T11:40:27.87Z.
  EXPECT_FALSE(ParseUtcTimestamp("1937-01-01T12:00:27.87+00:20").ok());
  EXPECT_EQ(ParseOk("1937-01-01T11:40:27.87Z"), -1041337172 * kUs - 130000);
  EXPECT_EQ(ParseOk("1937-01-01T11:40:27.87+00:00"), -1041337172 * kUs - 130000);
}

TEST(ParseUtcTimestampTest, FractionUpToNineDigitsTruncatedToMicroseconds) {
  const TimestampUs second = 482196050 * kUs;  // 1985-04-12T23:20:50Z
  EXPECT_EQ(ParseOk("1985-04-12T23:20:50.5Z"), second + 500000);
  EXPECT_EQ(ParseOk("1985-04-12T23:20:50.123456Z"), second + 123456);
  EXPECT_EQ(ParseOk("1985-04-12T23:20:50.1234564Z"), second + 123456);
  EXPECT_EQ(ParseOk("1985-04-12T23:20:50.1234569Z"), second + 123456) << "cut, not rounded";
  EXPECT_EQ(ParseOk("1985-04-12T23:20:50.999999999Z"), second + 999999)
      << "never rounds into the next second";
  EXPECT_EQ(ParseOk("1969-12-31T23:59:59.9999999Z"), -1) << "before the epoch: towards the past";
  EXPECT_EQ(Reason("1985-04-12T23:20:50.1234567890Z"), "more than 9 fraction digits");
  EXPECT_EQ(Reason("1985-04-12T23:20:50.Z"), "no digits after '.'");
}

TEST(ParseUtcTimestampTest, CalendarAndLayoutErrorsGiveTheReasonOnly) {
  EXPECT_EQ(Reason("2023-02-29T00:00:00Z"), "no such day in that month");  // not a leap year
  EXPECT_EQ(ParseOk("2000-02-29T00:00:00Z"), 951782400 * kUs);             // 400-year leap day
  EXPECT_EQ(Reason("2026-13-01T00:00:00Z"), "month out of range 01..12");
  EXPECT_EQ(Reason("2026-03-09T24:00:00Z"), "hour out of range 00..23");
  EXPECT_EQ(Reason("2026-03-09T10:60:00Z"), "minute out of range 00..59");
  EXPECT_EQ(Reason("2026-03-09T10:54:34"), "no zone: end with Z or +00:00 (times are UTC)");
  for (const std::string text :
       {"", "2026-03-09 10:54:34Z", "2026-03-09t10:54:34Z", "2026-3-09T10:54:34Z", "1773053674"}) {
    EXPECT_EQ(Reason(text).rfind("want YYYY-MM-DDTHH:MM:SS", 0), 0u) << text;
  }
  EXPECT_EQ(Reason("2026-03-09T10:54:34z"), "zone must be Z or +00:00 (times are UTC)");
}

TEST(ParseUtcTimestampTest, RoundTripsWithTheFormatter) {
  for (const TimestampUs t : {TimestampUs{0}, TimestampUs{-1}, 1773053674 * kUs + 123456,
                              -62135596800 * kUs, 253402300799 * kUs + 999999}) {
    EXPECT_EQ(ParseOk(FormatUtcTimestamp(t, SecondFraction::kMicrosIfAny)), t) << t;
  }
}

}  // namespace
}  // namespace nightjar::core
