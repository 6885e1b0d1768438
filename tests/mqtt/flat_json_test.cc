// The flat-JSON fast path (mqtt/internal/flat_json.h) against the full nlohmann-json path
// of PayloadParser: many generated payloads, valid and broken, must give the same sample
// (bit for bit) or the same error text through both. The reference is the full path, i.e.
// nlohmann-json's RFC 8259 parser (Debian's nlohmann-json3-dev) plus payload.h's rules.
#include "mqtt/internal/flat_json.h"

#include <gtest/gtest.h>

#include <algorithm>
#include <bit>
#include <cstdint>
#include <random>
#include <string>
#include <utility>
#include <vector>

#include "mqtt/payload.h"

namespace nightjar::mqtt {
namespace {

constexpr core::TimestampUs kArrival = 1773053674 * core::kMicrosPerSecond;  // 2026-03-09
constexpr const char* kTopic = "brackwater/cw2/pump_a/flow";

PayloadParser Parser(const std::string& value_field, const std::string& time_field,
                     TimeEncoding encoding) {
  PayloadFormat f;
  f.encoding = PayloadEncoding::kJson;
  f.value_field = value_field;
  f.time_field = time_field;
  f.time_encoding = encoding;
  core::Result<PayloadParser> parser = PayloadParser::Create(f);
  EXPECT_TRUE(parser.ok()) << parser.status().message();
  return *parser;
}

std::uint64_t Bits(double x) { return std::bit_cast<std::uint64_t>(x); }

template <typename T>
const T& Pick(std::mt19937_64& rng, const std::vector<T>& items) {
  return items[std::uniform_int_distribution<std::size_t>(0, items.size() - 1)(rng)];
}

// Number texts, well formed and not, including ones the full parser reads as floats,
// rejects (overflow) or reads with a sign that an integer loses (-0).
const std::vector<std::string> kNumbers = {
    "0",
    "-0",
    "12.3",
    "-3e-2",
    "1E3",
    "1e+2",
    "1733140000.5",
    "1733140000",
    "1733140000123",
    "-1",
    "0.1",
    "123456789012345678",
    "1234567890123456789",
    "18446744073709551616",
    "-9223372036854775809",
    "1e308",
    "1e309",
    "-1e309",
    "1e-400",
    "4.9e-324",
    "2.2250738585072014e-308",
    "0.30000000000000004",
    "9007199254740993",
    "253402300799",
    "253402300800",
    "-62167219200",
    "-62167219201",
    "253402300799999",
    "253402300800000",
    "253402300799.9999",
    "01",
    "1.",
    ".5",
    "-",
    "+1",
    "1e",
    "1e+",
    "--1",
    "0x10",
    "1.5.5",
    "NaN",
    "Infinity",
};

// Strings as they appear in JSON (with quotes); some hold numbers, ISO times or escapes.
const std::vector<std::string> kStrings = {
    R"("12.5")",
    R"(" 12.5 ")",
    R"("NaN")",
    R"("inf")",
    R"("-Infinity")",
    R"("abc")",
    R"("")",
    R"("1e999")",
    R"("\u0031\u0032")",
    R"("12\n")",
    "\"12\t\"",
    "\"caf\xc3\xa9\"",
    "\"\xff\"",
    R"("2026-03-09T10:54:34Z")",
    R"("2026-03-09T10:54:34.123456789Z")",
    R"("2026-03-09T10:54:34+00:00")",
    R"("2026-02-30T10:54:34Z")",
    R"("2026-03-09T23:59:60Z")",
    R"("2026-03-09 10:54:34Z")",
    R"("good")",
};

const std::vector<std::string> kLiterals = {"true", "false", "null", "nul", "True", "nullx"};

const std::vector<std::string> kKeys = {"value", "t", "ts", "q",      "unit", "ok",
                                        "val",   "",  "v",  "values", "T"};

const std::vector<std::string> kSpaces = {"", " ", "  ", "\t", "\n", "\r\n"};
const std::vector<std::string> kOddSpaces = {"\f", "\v", "\xc2\xa0"};  // not JSON's

// Good epoch and ISO times, as gateways write them.
const std::vector<std::string> kEpochSeconds = {"1733140000.5", "1733140000",          "0", "-1",
                                                "253402300799", "1733140000.123456789"};
const std::vector<std::string> kEpochMillis = {"1733140000123", "1733140000123.5", "0",
                                               "253402300799999"};
const std::vector<std::string> kIsoTimes = {R"("2026-03-09T10:54:34Z")",
                                            R"("2026-03-09T10:54:34.5Z")",
                                            R"("1999-12-31T23:59:59.999999999+00:00")"};

int Roll(std::mt19937_64& rng, int sides) {
  return std::uniform_int_distribution<int>(0, sides - 1)(rng);
}

std::string Space(std::mt19937_64& rng) {
  return Roll(rng, 60) == 0 ? Pick(rng, kOddSpaces) : Pick(rng, kSpaces);
}

std::string Scalar(std::mt19937_64& rng) {
  switch (Roll(rng, 10)) {
    case 0:
    case 1:
    case 2:
    case 3:
      return Pick(rng, kNumbers);
    case 4:
    case 5:
    case 6:
      return Pick(rng, kStrings);
    case 7:
      return Pick(rng, kLiterals);
    case 8:
      return R"({"x": 1})";
    default:
      return "[1, 2]";
  }
}

std::string TimeScalar(std::mt19937_64& rng, TimeEncoding encoding) {
  if (Roll(rng, 10) < 3) return Scalar(rng);
  switch (encoding) {
    case TimeEncoding::kEpochSeconds:
      return Pick(rng, kEpochSeconds);
    case TimeEncoding::kEpochMillis:
      return Pick(rng, kEpochMillis);
    case TimeEncoding::kIso8601:
      return Pick(rng, kIsoTimes);
  }
  return "";
}

// A generated object holding the configured fields most of the time, mostly flat, with
// other members, repeats, nesting, escapes, odd spacing and damage now and then.
std::string Payload(std::mt19937_64& rng, const internal::FlatJsonFields& fields) {
  std::vector<std::pair<std::string, std::string>> members;
  const int extras = Roll(rng, 4);
  for (int i = 0; i < extras; ++i) members.emplace_back(Pick(rng, kKeys), Scalar(rng));
  if (Roll(rng, 10) != 0) members.emplace_back(fields.value_key, Scalar(rng));
  if (!fields.time_key.empty() && Roll(rng, 10) != 0) {
    members.emplace_back(fields.time_key, TimeScalar(rng, fields.time_encoding));
  }
  if (Roll(rng, 20) == 0 && !members.empty()) members.push_back(members.front());  // repeat
  std::shuffle(members.begin(), members.end(), rng);
  std::string out = Space(rng) + "{" + Space(rng);
  for (std::size_t i = 0; i < members.size(); ++i) {
    if (i > 0) out += "," + Space(rng);
    std::string key = members[i].first;
    if (Roll(rng, 40) == 0) key = "\\u0076alue";  // "value", escaped
    out += "\"" + key + "\"" + Space(rng) + ":" + Space(rng) + members[i].second + Space(rng);
  }
  out += "}" + Space(rng);
  switch (Roll(rng, 30)) {
    case 0:  // truncated
      out.resize(std::uniform_int_distribution<std::size_t>(0, out.size())(rng));
      break;
    case 1:  // one byte changed
      if (!out.empty()) {
        out[std::uniform_int_distribution<std::size_t>(0, out.size() - 1)(rng)] =
            static_cast<char>(Roll(rng, 256));
      }
      break;
    case 2:
      out += "x";
      break;
    case 3:
      out += "{}";
      break;
    case 4:
      out = "\xEF\xBB\xBF" + out;  // UTF-8 byte order mark
      break;
    case 5:
      out.insert(out.size() > 1 ? out.size() - 1 : 0, ",");  // trailing comma, maybe
      break;
    case 6:
      out += std::string(1, '\0');
      break;
    case 7:
      out = "[" + out + "]";
      break;
    default:
      break;
  }
  return out;
}

// A flat payload of the shape gateways send, always valid.
std::string GoodPayload(std::mt19937_64& rng) {
  std::uniform_real_distribution<double> value(-1e4, 1e4);
  const auto t = 1'733'140'000.0 + std::uniform_real_distribution<double>(0, 1e6)(rng);
  char buffer[128];
  std::snprintf(buffer, sizeof buffer, R"({"t": %.3f, "value": %.17g, "ts": "%s"})", t, value(rng),
                "2026-03-09T10:54:34.5Z");
  return buffer;
}

struct Outcome {
  int fast = 0;      // payloads the fast path answered
  int compared = 0;  // payloads compared
  int accepted = 0;  // payloads the full path accepted
};

// Compares Parse() (fast path first) with ParseWithFullJsonParser() for `payload`, and
// the fast path's own answer with the full path's.
void Compare(const PayloadParser& parser, const internal::FlatJsonFields& fields,
             const std::string& payload, Outcome* outcome) {
  const core::Result<ParsedSample> full = parser.ParseWithFullJsonParser(kTopic, payload, kArrival);
  const core::Result<ParsedSample> used = parser.Parse(kTopic, payload, kArrival);
  const std::optional<ParsedSample> fast = internal::ScanFlatJson(payload, fields, kArrival);
  ++outcome->compared;
  if (full.ok()) ++outcome->accepted;
  ASSERT_EQ(used.ok(), full.ok()) << payload << " full: " << full.status().message();
  if (full.ok()) {
    EXPECT_EQ(used->time, full->time) << payload;
    EXPECT_EQ(Bits(used->value), Bits(full->value)) << payload;
  } else {
    EXPECT_EQ(used.status().message(), full.status().message()) << payload;
  }
  if (fast) {
    ++outcome->fast;
    ASSERT_TRUE(full.ok()) << payload << ": fast path accepted, full path says "
                           << full.status().message();
    EXPECT_EQ(fast->time, full->time) << payload;
    EXPECT_EQ(Bits(fast->value), Bits(full->value)) << payload;
  }
}

struct Case {
  const char* value_field;
  const char* time_field;
  TimeEncoding encoding;
};

const Case kCases[] = {
    {"value", "", TimeEncoding::kIso8601},      {"value", "t", TimeEncoding::kEpochSeconds},
    {"value", "t", TimeEncoding::kEpochMillis}, {"value", "ts", TimeEncoding::kIso8601},
    {"t", "t", TimeEncoding::kEpochSeconds},    {"q", "ts", TimeEncoding::kIso8601},
};

TEST(FlatJsonTest, GeneratedPayloadsGiveWhatTheFullParserGives) {
  for (const Case& c : kCases) {
    SCOPED_TRACE(std::string(c.value_field) + " / " + c.time_field + " / " +
                 TimeEncodingName(c.encoding));
    const PayloadParser parser = Parser(c.value_field, c.time_field, c.encoding);
    const internal::FlatJsonFields fields{c.value_field, c.time_field, c.encoding};
    std::mt19937_64 rng(20261202);  // fixed, so a failure repeats
    Outcome outcome;
    for (int i = 0; i < 8000; ++i) {
      Compare(parser, fields, Payload(rng, fields), &outcome);
      if (HasFatalFailure()) return;
    }
    // The generator must reach both paths, or the comparison proves little.
    EXPECT_GT(outcome.fast, 120) << outcome.compared;
    EXPECT_GT(outcome.accepted - outcome.fast, 200) << outcome.compared;
    EXPECT_GT(outcome.compared - outcome.accepted, 2000) << outcome.compared;
  }
}

TEST(FlatJsonTest, GatewayPayloadsTakeTheFastPathWithTheFullParsersValues) {
  const PayloadParser parser = Parser("value", "t", TimeEncoding::kEpochSeconds);
  const internal::FlatJsonFields fields{"value", "t", TimeEncoding::kEpochSeconds};
  std::mt19937_64 rng(7);
  Outcome outcome;
  for (int i = 0; i < 5000; ++i) Compare(parser, fields, GoodPayload(rng), &outcome);
  EXPECT_EQ(outcome.fast, 5000);
  EXPECT_EQ(outcome.accepted, 5000);
}

TEST(FlatJsonTest, FallsBackOnWhatItDoesNotFullyUnderstand) {
  const internal::FlatJsonFields fields{"value", "t", TimeEncoding::kEpochSeconds};
  // The shape of the bench and the gateways: taken. The value is the double nearest to
  // 12.3, as the compiler reads the literal (IEEE 754 round to nearest, common practice);
  // 1733140000.5 s is exact in binary.
  const std::optional<ParsedSample> plain =
      internal::ScanFlatJson(R"({"t": 1733140000.5, "value": 12.3})", fields, kArrival);
  ASSERT_TRUE(plain.has_value());
  EXPECT_EQ(plain->value, 12.3);
  EXPECT_EQ(plain->time, 1'733'140'000'500'000);
  for (const char* payload : {
           R"({"t": 1, "value": {"x": 1}})",              // nesting
           R"({"t": 1, "value": [1]})",                   // array
           R"({"t": 1, "val\u0075e": 2})",                // escape in a key
           R"({"t": 1, "value": "1\u0032"})",             // escape in a value
           R"({"t": 1, "value": 1, "value": 2})",         // repeated key
           R"({"t": 1, "value": 1} x)",                   // trailing bytes
           "{\"t\": 1,\f\"value\": 1}",                   // not JSON whitespace
           R"({"t": 1, "value": 1,})",                    // trailing comma
           R"({"t": 1, "value": 1e999})",                 // overflow: an error there
           R"({"t": 1, "value": true})",                  // wrong type: an error there
           R"({"value": 1})",                             // no time
           R"({"t": 1e20, "value": 1})",                  // time out of range
           R"({"t": 1, "value": 12345678901234567890})",  // beyond 18 digits
       }) {
    EXPECT_FALSE(internal::ScanFlatJson(payload, fields, kArrival).has_value()) << payload;
  }
}

}  // namespace
}  // namespace nightjar::mqtt
