#include "replay/timestamp.h"

#include <gtest/gtest.h>

#include <cstdint>
#include <string>
#include <vector>

namespace nightjar::replay {
namespace {

constexpr core::TimestampUs kUs = core::kMicrosPerSecond;

core::TimestampUs ParseOk(const std::string& text) {
  core::Result<core::TimestampUs> t = ParseTimestamp(text);
  EXPECT_TRUE(t.ok()) << text << ": " << t.status().message();
  return t.ok() ? *t : -1;
}

// Expected epoch seconds come from the POSIX definition of "seconds since the Epoch"
// (IEEE Std 1003.1, Base Definitions 4.16), checked with `date -u -d <time> +%s`.
TEST(TimestampTest, KnownEpochValues) {
  EXPECT_EQ(ParseOk("1970-01-01T00:00:00Z"), 0);
  EXPECT_EQ(ParseOk("2024-02-29T00:00:00Z"), 1709164800 * kUs);  // leap day
  EXPECT_EQ(ParseOk("2000-02-29T00:00:00Z"), 951782400 * kUs);   // 400-year leap day
  EXPECT_EQ(ParseOk("2026-03-09T10:54:34Z"), 1773053674 * kUs);
  EXPECT_EQ(ParseOk("1969-12-31T23:59:59Z"), -1 * kUs);
  EXPECT_EQ(ParseOk("0001-01-01T00:00:00Z"), -62135596800 * kUs);
  EXPECT_EQ(ParseOk("9999-12-31T23:59:59Z"), 253402300799 * kUs);
}

TEST(TimestampTest, FractionAndOffset) {
  EXPECT_EQ(ParseOk("2026-03-09T10:54:34.5Z"), 1773053674 * kUs + 500000);
  EXPECT_EQ(ParseOk("2026-03-09T10:54:34.123456Z"), 1773053674 * kUs + 123456);
  EXPECT_EQ(ParseOk("2026-03-09T10:54:34.000001Z"), 1773053674 * kUs + 1);
  EXPECT_EQ(ParseOk("2026-03-09T10:54:34+00:00"), 1773053674 * kUs);
  EXPECT_EQ(ParseOk("2026-03-09T10:54:34.25+00:00"), 1773053674 * kUs + 250000);
  EXPECT_EQ(ParseOk("1969-12-31T23:59:59.999999Z"), -1);
  // Past microseconds the digits are cut, never rounded (core::ParseUtcTimestamp).
  EXPECT_EQ(ParseOk("2026-03-09T10:54:34.1234569Z"), 1773053674 * kUs + 123456);
  EXPECT_EQ(ParseOk("2026-03-09T10:54:34.999999999Z"), 1773053674 * kUs + 999999);
}

TEST(TimestampTest, RejectsEverythingElse) {
  const std::vector<std::string> bad_texts = {
      "",
      "2026-03-09T10:54:34",              // no zone
      "2026-03-09 10:54:34Z",             // space instead of T
      "2026-03-09t10:54:34Z",             // lowercase t
      "2026-03-09T10:54:34z",             // lowercase z
      "2026-03-09T10:54:34+01:00",        // not UTC
      "2026-03-09T10:54:34-00:00",        // only +00:00 names UTC
      "2026-03-09T10:54:34+0000",         // offset without colon
      "2026-03-09T10:54:34.Z",            // '.' without digits
      "2026-03-09T10:54:34.1234567890Z",  // more than 9 fraction digits
      "2026-3-09T10:54:34Z",              // short field
      "2023-02-29T00:00:00Z",             // not a leap year
      "2100-02-29T00:00:00Z",             // century, not a leap year
      "2026-04-31T00:00:00Z",             // April has 30 days
      "2026-13-01T00:00:00Z",             // month 13
      "2026-00-01T00:00:00Z",             // month 0
      "2026-03-00T00:00:00Z",             // day 0
      "2026-03-09T24:00:00Z",             // hour 24
      "2026-03-09T10:60:00Z",             // minute 60
      "2026-03-09T23:59:60Z",             // leap second
      "2026-03-09T10:54:34Z ",            // trailing space
      " 2026-03-09T10:54:34Z",            // leading space
      "1773053674",                       // epoch number
      "+2026-03-09T10:54:34Z",            // signed year
  };
  for (const std::string& text : bad_texts) {
    core::Result<core::TimestampUs> t = ParseTimestamp(text);
    EXPECT_FALSE(t.ok()) << "accepted '" << text << "'";
    if (!t.ok()) {
      EXPECT_EQ(t.status().code(), core::StatusCode::kInvalidArgument);
      EXPECT_NE(t.status().message().find("bad timestamp"), std::string::npos);
    }
  }
}

TEST(TimestampTest, Formats) {
  EXPECT_EQ(FormatTimestamp(0), "1970-01-01T00:00:00Z");
  EXPECT_EQ(FormatTimestamp(1709164800 * kUs), "2024-02-29T00:00:00Z");
  EXPECT_EQ(FormatTimestamp(1773053674 * kUs + 123456), "2026-03-09T10:54:34.123456Z");
  EXPECT_EQ(FormatTimestamp(1773053674 * kUs + 500000), "2026-03-09T10:54:34.500000Z");
  EXPECT_EQ(FormatTimestamp(-1), "1969-12-31T23:59:59.999999Z");
  EXPECT_EQ(FormatTimestamp(-62135596800 * kUs), "0001-01-01T00:00:00Z");
  // The extremes of the type format without overflow.
  EXPECT_FALSE(FormatTimestamp(INT64_MIN).empty());
  EXPECT_FALSE(FormatTimestamp(INT64_MAX).empty());
}

TEST(TimestampTest, RoundTripsAcrossTheRange) {
  // Every day boundary from 1900 to 2100 and a spread of odd instants over 0000..9999.
  const core::TimestampUs first = ParseOk("1900-01-01T00:00:00Z");
  const core::TimestampUs last = ParseOk("2100-12-31T00:00:00Z");
  for (core::TimestampUs t = first; t <= last; t += 86400 * kUs) {
    ASSERT_EQ(ParseOk(FormatTimestamp(t)), t) << FormatTimestamp(t);
    ASSERT_EQ(ParseOk(FormatTimestamp(t - 1)), t - 1) << FormatTimestamp(t - 1);
  }
  const core::TimestampUs low = ParseOk("0000-01-01T00:00:00Z");
  const core::TimestampUs high = ParseOk("9999-12-31T23:59:59.999999Z");
  // A step coprime with a day so seconds and fractions vary.
  const core::TimestampUs step = 9'876'543'210'987;
  for (core::TimestampUs t = low; t <= high - step; t += step) {
    ASSERT_EQ(ParseOk(FormatTimestamp(t)), t) << FormatTimestamp(t);
  }
  EXPECT_EQ(FormatTimestamp(high), "9999-12-31T23:59:59.999999Z");
  EXPECT_EQ(FormatTimestamp(low), "0000-01-01T00:00:00Z");
}

}  // namespace
}  // namespace nightjar::replay
