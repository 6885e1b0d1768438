#include "mqtt/payload.h"

#include <gtest/gtest.h>

#include <cmath>
#include <string>

namespace nightjar::mqtt {
namespace {

constexpr core::TimestampUs kUs = core::kMicrosPerSecond;
constexpr core::TimestampUs kArrival = 1773053674 * kUs;  // 2026-03-09T10:54:34Z
constexpr const char* kTopic = "brackwater/cw2/pump_a/flow";

PayloadParser Parser(PayloadFormat format) {
  core::Result<PayloadParser> parser = PayloadParser::Create(std::move(format));
  EXPECT_TRUE(parser.ok()) << parser.status().message();
  return parser.ok() ? *parser : *PayloadParser::Create({});
}

PayloadFormat Json(std::string value_field = "value", std::string time_field = "",
                   TimeEncoding time_encoding = TimeEncoding::kIso8601) {
  PayloadFormat f;
  f.encoding = PayloadEncoding::kJson;
  f.value_field = std::move(value_field);
  f.time_field = std::move(time_field);
  f.time_encoding = time_encoding;
  return f;
}

ParsedSample ParseOk(const PayloadParser& parser, const std::string& payload) {
  core::Result<ParsedSample> s = parser.Parse(kTopic, payload, kArrival);
  EXPECT_TRUE(s.ok()) << payload << ": " << s.status().message();
  return s.ok() ? *s : ParsedSample{-1, -1};
}

// The error for `payload`, which must start by naming the topic.
std::string ParseError(const PayloadParser& parser, const std::string& payload) {
  core::Result<ParsedSample> s = parser.Parse(kTopic, payload, kArrival);
  EXPECT_FALSE(s.ok()) << payload;
  if (s.ok()) return "";
  EXPECT_EQ(s.status().code(), core::StatusCode::kInvalidArgument);
  EXPECT_EQ(s.status().message().rfind(std::string("topic ") + kTopic + ": ", 0), 0u)
      << s.status().message();
  return s.status().message().substr(std::string("topic ").size() + std::string(kTopic).size() + 2);
}

TEST(PayloadTest, PlainNumbersAreStrictAndGetTheArrivalTime) {
  const PayloadParser p = Parser({});
  EXPECT_EQ(ParseOk(p, "12.75").value, 12.75);
  EXPECT_EQ(ParseOk(p, "12.75").time, kArrival);
  EXPECT_EQ(ParseOk(p, "-3e-2").value, -0.03);
  EXPECT_EQ(ParseOk(p, "+41").value, 41.0);
  EXPECT_EQ(ParseOk(p, " \t41\r\n").value, 41.0);
  EXPECT_EQ(ParseOk(p, ".5").value, 0.5);
  EXPECT_EQ(ParseOk(p, "1E3").value, 1000.0);
  EXPECT_EQ(ParseOk(p, "-0").value, 0.0);

  EXPECT_EQ(ParseError(p, ""), "payload is empty, want a number");
  EXPECT_EQ(ParseError(p, "  \n"), "payload is blank, want a number");
  EXPECT_EQ(ParseError(p, "abc"), "payload 'abc' is not a number");
  EXPECT_EQ(ParseError(p, "12.5 m3/h"), "payload '12.5 m3/h' is not a number");
  EXPECT_EQ(ParseError(p, "1,5"), "payload '1,5' is not a number");
  EXPECT_EQ(ParseError(p, "1 2"), "payload '1 2' is not a number");
  EXPECT_EQ(ParseError(p, "0x1A"), "payload '0x1A' is not a number");
  EXPECT_EQ(ParseError(p, "+-1"), "payload '+-1' is not a number");
  EXPECT_EQ(ParseError(p, "++1"), "payload '++1' is not a number");
  EXPECT_EQ(ParseError(p, "+"), "payload '+' is not a number");
  EXPECT_EQ(ParseError(p, "{\"value\": 1}"), "payload '{\"value\": 1}' is not a number");
  EXPECT_EQ(ParseError(p, "1e999"), "payload '1e999' is out of the range of a double");
  EXPECT_EQ(ParseError(p, std::string("1\0", 2)), "payload '1\\x00' is not a number");
}

TEST(PayloadTest, NanAndInfinityPassThroughForTheSensorChecks) {
  const PayloadParser p = Parser({});
  EXPECT_TRUE(std::isnan(ParseOk(p, "nan").value));
  EXPECT_TRUE(std::isnan(ParseOk(p, "NaN").value));
  EXPECT_EQ(ParseOk(p, "inf").value, HUGE_VAL);
  EXPECT_EQ(ParseOk(p, "-Infinity").value, -HUGE_VAL);
  EXPECT_EQ(ParseOk(p, "+INF").value, HUGE_VAL);
}

TEST(PayloadTest, LongPayloadsAreRejectedBeforeParsing) {
  PayloadFormat f;
  f.max_payload_bytes = 8;
  const PayloadParser p = Parser(f);
  EXPECT_EQ(ParseOk(p, "12345678").value, 12345678.0);
  EXPECT_EQ(ParseError(p, "123456789"), "payload of 9 bytes is longer than max_payload_bytes 8");
}

TEST(PayloadTest, LongOrBinaryPayloadsAreQuotedShortAndEscaped) {
  const PayloadParser p = Parser({});
  const std::string junk(200, 'x');
  EXPECT_EQ(ParseError(p, junk), "payload '" + std::string(60, 'x') + "...' is not a number");
}

TEST(PayloadTest, JsonValueFieldsByDottedPath) {
  const PayloadParser flat = Parser(Json());
  EXPECT_EQ(ParseOk(flat, R"({"value": 12.5})").value, 12.5);
  EXPECT_EQ(ParseOk(flat, R"({"value": 12.5})").time, kArrival);
  EXPECT_EQ(ParseOk(flat, R"({"unit": "m3/h", "value": -7})").value, -7.0);
  EXPECT_EQ(ParseOk(flat, R"({"value": 18446744073709551615})").value, 18446744073709551615.0);
  EXPECT_EQ(ParseOk(flat, R"( {"value":"3.25"} )").value, 3.25);  // a quoted number
  EXPECT_TRUE(std::isnan(ParseOk(flat, R"({"value": "NaN"})").value));
  EXPECT_TRUE(std::isnan(ParseOk(flat, R"({"value": null})").value));  // bad quality

  const PayloadParser nested = Parser(Json("data.value"));
  EXPECT_EQ(ParseOk(nested, R"({"data": {"value": 4.5, "q": 192}})").value, 4.5);
}

TEST(PayloadTest, JsonErrorsNameTheField) {
  const PayloadParser flat = Parser(Json());
  EXPECT_EQ(ParseError(flat, R"({"val": 1})"), "field 'value' missing");
  EXPECT_EQ(ParseError(flat, R"({"value": true})"), "field 'value' is a boolean, want a number");
  EXPECT_EQ(ParseError(flat, R"({"value": [1]})"), "field 'value' is an array, want a number");
  EXPECT_EQ(ParseError(flat, R"({"value": {"v": 1}})"),
            "field 'value' is an object, want a number");
  EXPECT_EQ(ParseError(flat, R"({"value": "high"})"),
            "field 'value': payload 'high' is not a number");
  EXPECT_EQ(ParseError(flat, "[1, 2]"), "payload is a JSON array, want an object");
  EXPECT_EQ(ParseError(flat, "12.5"), "payload is a JSON number, want an object");

  const PayloadParser nested = Parser(Json("data.value"));
  EXPECT_EQ(ParseError(nested, R"({"value": 1})"), "field 'data.value' missing");
  EXPECT_EQ(ParseError(nested, R"({"data": {"v": 1}})"), "field 'data.value' missing");
  EXPECT_EQ(ParseError(nested, R"({"data": 5})"),
            "field 'data.value': 'data' is a number, not an object");
}

TEST(PayloadTest, JsonSyntaxErrorsSayWhere) {
  const PayloadParser flat = Parser(Json());
  const std::string e1 = ParseError(flat, R"({"value": 1,})");
  EXPECT_EQ(e1.rfind("not JSON: parse error at line 1, column 13: ", 0), 0u) << e1;
  const std::string e2 = ParseError(flat, "{\"value\": 1");
  EXPECT_EQ(e2.rfind("not JSON: parse error at line 1, column 12: ", 0), 0u) << e2;
  const std::string e3 = ParseError(flat, "");
  EXPECT_EQ(e3.rfind("not JSON: parse error at line 1, column 1: ", 0), 0u) << e3;
  const std::string e4 = ParseError(flat, "{\"value\": NaN}");  // not JSON: quote it
  EXPECT_EQ(e4.rfind("not JSON: parse error at line 1, column 11: ", 0), 0u) << e4;
}

// Expected instants from POSIX "seconds since the Epoch" (IEEE Std 1003.1, Base
// Definitions 4.16), checked with `date -u -d <time> +%s`.
TEST(PayloadTest, JsonIsoTimestamps) {
  const PayloadParser p = Parser(Json("value", "ts"));
  EXPECT_EQ(ParseOk(p, R"({"value": 1, "ts": "2026-03-09T10:54:34Z"})").time, 1773053674 * kUs);
  EXPECT_EQ(ParseOk(p, R"({"value": 1, "ts": "2024-02-29T23:59:59.25+00:00"})").time,
            1709251199 * kUs + 250000);
  EXPECT_EQ(ParseOk(p, R"({"value": 1, "ts": "2026-03-09T10:54:34.123456789Z"})").time,
            1773053674 * kUs + 123456);  // nanoseconds cut to microseconds
  EXPECT_EQ(ParseOk(p, R"({"value": 1, "ts": "0000-01-01T00:00:00Z"})").time, -62167219200 * kUs);

  EXPECT_EQ(ParseError(p, R"({"value": 1})"), "field 'ts' missing");
  EXPECT_EQ(ParseError(p, R"({"value": 1, "ts": 1773053674})"),
            "field 'ts' is a number, want an ISO-8601 UTC string (time_encoding iso8601)");
  EXPECT_EQ(ParseError(p, R"({"value": 1, "ts": "2026-03-09T10:54:34"})"),
            "field 'ts': bad timestamp '2026-03-09T10:54:34': no zone: end with Z or +00:00 "
            "(times are UTC)");
  EXPECT_EQ(ParseError(p, R"({"value": 1, "ts": "2026-03-09T10:54:34+01:00"})"),
            "field 'ts': bad timestamp '2026-03-09T10:54:34+01:00': zone must be Z or +00:00 "
            "(times are UTC)");
  EXPECT_EQ(ParseError(p, R"({"value": 1, "ts": "2026-03-09 10:54:34Z"})"),
            "field 'ts': bad timestamp '2026-03-09 10:54:34Z': want "
            "YYYY-MM-DDTHH:MM:SS[.fff]Z or ...+00:00");
  EXPECT_EQ(ParseError(p, R"({"value": 1, "ts": "2025-02-29T00:00:00Z"})"),
            "field 'ts': bad timestamp '2025-02-29T00:00:00Z': no such day in that month");
  EXPECT_EQ(ParseError(p, R"({"value": 1, "ts": "2026-03-09T10:54:60Z"})"),
            "field 'ts': bad timestamp '2026-03-09T10:54:60Z': second out of range 00..59 (no "
            "leap seconds)");
  EXPECT_EQ(ParseError(p, R"({"value": 1, "ts": "2026-03-09T10:54:34.Z"})"),
            "field 'ts': bad timestamp '2026-03-09T10:54:34.Z': no digits after '.'");
  EXPECT_EQ(ParseError(p, R"({"value": 1, "ts": "2026-03-09T10:54:34.1234567890Z"})"),
            "field 'ts': bad timestamp '2026-03-09T10:54:34.1234567890Z': more than 9 fraction "
            "digits");
}

TEST(PayloadTest, JsonEpochTimestampsInTheConfiguredUnit) {
  const PayloadParser s = Parser(Json("value", "t", TimeEncoding::kEpochSeconds));
  EXPECT_EQ(ParseOk(s, R"({"value": 1, "t": 1773053674})").time, 1773053674 * kUs);
  EXPECT_EQ(ParseOk(s, R"({"value": 1, "t": 1773053674.5})").time, 1773053674 * kUs + 500000);
  EXPECT_EQ(ParseOk(s, R"({"value": 1, "t": -1})").time, -kUs);
  EXPECT_EQ(ParseOk(s, R"({"value": 1, "t": 253402300799})").time, 253402300799 * kUs);
  // The same number read as milliseconds: the unit is configured, not guessed.
  const PayloadParser ms = Parser(Json("value", "meta.t", TimeEncoding::kEpochMillis));
  EXPECT_EQ(ParseOk(ms, R"({"value": 1, "meta": {"t": 1773053674}})").time,
            core::TimestampUs{1773053674} * 1000);
  EXPECT_EQ(ParseOk(ms, R"({"value": 1, "meta": {"t": 1773053674123}})").time,
            1773053674123 * 1000);
  EXPECT_EQ(ParseOk(ms, R"({"value": 1, "meta": {"t": 1773053674123.25}})").time,
            1773053674123 * 1000 + 250);

  EXPECT_EQ(ParseError(s, R"({"value": 1, "t": "1773053674"})"),
            "field 't' is a string, want a number (time_encoding epoch_s)");
  EXPECT_EQ(ParseError(s, R"({"value": 1, "t": 253402300800})"),
            "field 't' 253402300800 outside years 0000..9999 (time_encoding epoch_s)");
  EXPECT_EQ(ParseError(s, R"({"value": 1, "t": 1e300})"),
            "field 't' 1e+300 outside years 0000..9999 (time_encoding epoch_s)");
  EXPECT_EQ(ParseError(ms, R"({"value": 1, "meta": {"t": 18446744073709551615}})"),
            "field 'meta.t' 18446744073709551615 outside years 0000..9999 (time_encoding "
            "epoch_ms)");
  EXPECT_EQ(ParseError(ms, R"({"value": 1, "meta": 3})"),
            "field 'meta.t': 'meta' is a number, not an object");
}

TEST(PayloadTest, FormatValidationNamesTheField) {
  PayloadFormat f = Json("data..value");
  EXPECT_EQ(ValidatePayloadFormat(f).message(), "value_field 'data..value': empty key at column 6");
  f = Json("");
  EXPECT_EQ(ValidatePayloadFormat(f).message(), "value_field: empty");
  f = Json("value", "ts.");
  EXPECT_EQ(ValidatePayloadFormat(f).message(), "time_field 'ts.': empty key at column 4");
  f = PayloadFormat{};
  f.time_field = "ts";
  EXPECT_EQ(ValidatePayloadFormat(f).message(),
            "time_field: a plain number payload has no fields (set encoding json, or leave "
            "time_field empty to use the arrival time)");
  f = PayloadFormat{};
  f.max_payload_bytes = 0;
  EXPECT_EQ(ValidatePayloadFormat(f).message(),
            "max_payload_bytes: must be in 1..268435455, got 0");
  EXPECT_FALSE(PayloadParser::Create(f).ok());
  EXPECT_TRUE(ValidatePayloadFormat(Json("a.b.c", "x.y", TimeEncoding::kEpochMillis)).ok());
}

TEST(PayloadTest, EncodingNames) {
  EXPECT_STREQ(PayloadEncodingName(PayloadEncoding::kNumber), "number");
  EXPECT_STREQ(PayloadEncodingName(PayloadEncoding::kJson), "json");
  EXPECT_STREQ(TimeEncodingName(TimeEncoding::kIso8601), "iso8601");
  EXPECT_STREQ(TimeEncodingName(TimeEncoding::kEpochSeconds), "epoch_s");
  EXPECT_STREQ(TimeEncodingName(TimeEncoding::kEpochMillis), "epoch_ms");
}

}  // namespace
}  // namespace nightjar::mqtt
