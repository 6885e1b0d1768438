// Alert JSON and ISO-8601 formatting: every line we write is parsed back with
// nlohmann::json (an independent, strict RFC 8259 parser that also rejects ill-formed
// UTF-8) and compared field by field.
#include "core/alert_json.h"

#include <gtest/gtest.h>

#include <cmath>
#include <cstdint>
#include <limits>
#include <nlohmann/json.hpp>
#include <string>
#include <utility>
#include <vector>

#include "core/timestamp_format.h"

namespace nightjar::core {
namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
constexpr double kInf = std::numeric_limits<double>::infinity();
// 2026-03-09T10:54:34Z is 1773053674 s after the epoch (Python 3:
// datetime(2026, 3, 9, 10, 54, 34, tzinfo=timezone.utc).timestamp()).
constexpr TimestampUs kInstant = 1'773'053'674LL * kMicrosPerSecond;

Alert SampleAlert() {
  Alert alert;
  alert.time = kInstant + 250'000;
  alert.channel = "cw2.pump_a.flow";
  alert.kind = AlertKind::kSensor;
  alert.detector = Detector::kFlatline;
  alert.phase = AlertPhase::kClear;
  alert.value = 101.25;
  alert.expected = 96.203125;
  alert.z = -5.1;
  alert.statistic = 0.1;
  alert.threshold = 1e-300;
  alert.priority = Priority::kHigh;
  alert.message = "cw2.pump_a.flow stuck at 101 m3/h";
  return alert;
}

nlohmann::json Parse(const std::string& text) {
  nlohmann::json parsed = nlohmann::json::parse(text, nullptr, /*allow_exceptions=*/false);
  EXPECT_FALSE(parsed.is_discarded()) << "not valid JSON: " << text;
  return parsed;
}

// The string as the parser reads it back out of a JSON string holding `text`.
std::string RoundTrip(const std::string& text) {
  std::string out;
  AppendJsonString(text, &out);
  const nlohmann::json parsed = Parse(out);
  if (!parsed.is_string()) return "<not a string: " + out + ">";
  return parsed.get<std::string>();
}

TEST(AlertJsonTest, EveryFieldReadsBackWithItsValue) {
  const Alert alert = SampleAlert();
  const std::string line = AlertToJson(alert);
  EXPECT_EQ(line.find('\n'), std::string::npos) << "one line per alert";
  const nlohmann::json j = Parse(line);
  ASSERT_TRUE(j.is_object());
  EXPECT_EQ(j.size(), 14u);
  EXPECT_EQ(j.at("annunciated"), true);
  EXPECT_TRUE(j.at("episode").is_null());  // a sensor alarm belongs to no episode
  EXPECT_EQ(j.at("ts"), "2026-03-09T10:54:34.250Z");
  EXPECT_EQ(j.at("channel"), alert.channel);
  EXPECT_EQ(j.at("kind"), "sensor");
  EXPECT_EQ(j.at("detector"), "flatline");
  EXPECT_EQ(j.at("phase"), "clear");
  EXPECT_EQ(j.at("priority"), "high");
  EXPECT_EQ(j.at("message"), alert.message);
  // Shortest round-trip text: the parser gets the very same doubles back.
  EXPECT_EQ(j.at("value").get<double>(), alert.value);
  EXPECT_EQ(j.at("expected").get<double>(), alert.expected);
  EXPECT_EQ(j.at("z").get<double>(), alert.z);
  EXPECT_EQ(j.at("statistic").get<double>(), alert.statistic);
  EXPECT_EQ(j.at("threshold").get<double>(), alert.threshold);
}

TEST(AlertJsonTest, FieldsComeInTheDocumentedOrder) {
  const nlohmann::ordered_json j =
      nlohmann::ordered_json::parse(AlertToJson(SampleAlert()), nullptr, false);
  ASSERT_FALSE(j.is_discarded());
  std::vector<std::string> keys;
  for (const auto& item : j.items()) keys.push_back(item.key());
  const std::vector<std::string> expected = {
      "ts", "channel",   "kind",      "detector", "phase",   "value",       "expected",
      "z",  "statistic", "threshold", "priority", "message", "annunciated", "episode"};
  EXPECT_EQ(keys, expected);
}

TEST(AlertJsonTest, AnEpisodeMemberCarriesItsEpisode) {
  Alert alert = SampleAlert();
  alert.kind = AlertKind::kAnomaly;
  alert.annunciated = false;
  alert.asset = "cw2.pump_a";
  alert.episode_first_out = "cw2.pump_a.discharge_pressure";
  alert.episode_since = alert.time - 12 * kMicrosPerSecond;
  alert.episode_active = 2;
  const nlohmann::json j = Parse(AlertToJson(alert));
  EXPECT_EQ(j.at("annunciated"), false);
  const nlohmann::json& episode = j.at("episode");
  EXPECT_EQ(episode.at("asset"), "cw2.pump_a");
  EXPECT_EQ(episode.at("first_out"), "cw2.pump_a.discharge_pressure");
  EXPECT_EQ(episode.at("since"), "2026-03-09T10:54:22.250Z");
  EXPECT_EQ(episode.at("active"), 2);
  alert.episode_first_out.clear();  // a clear that belongs to no open episode
  const nlohmann::json none = Parse(AlertToJson(alert));
  EXPECT_TRUE(none.at("episode").at("first_out").is_null());
  EXPECT_TRUE(none.at("episode").at("since").is_null());
}

TEST(AlertJsonTest, EveryEnumValueHasItsWireName) {
  // The wire names are those of alert.h; each must reach the JSON unchanged.
  Alert alert = SampleAlert();
  for (const Detector d :
       {Detector::kCusum, Detector::kEwma, Detector::kSpike, Detector::kNotFinite, Detector::kRange,
        Detector::kFlatline, Detector::kGap, Detector::kTemplate}) {
    alert.detector = d;
    EXPECT_EQ(Parse(AlertToJson(alert)).at("detector"), DetectorName(d));
  }
  for (const AlertKind k : {AlertKind::kAnomaly, AlertKind::kEvent, AlertKind::kSensor}) {
    alert.kind = k;
    EXPECT_EQ(Parse(AlertToJson(alert)).at("kind"), AlertKindName(k));
  }
  for (const Priority p : {Priority::kLow, Priority::kMedium, Priority::kHigh}) {
    alert.priority = p;
    EXPECT_EQ(Parse(AlertToJson(alert)).at("priority"), PriorityName(p));
  }
  alert.phase = AlertPhase::kRaise;
  EXPECT_EQ(Parse(AlertToJson(alert)).at("phase"), "raise");
}

TEST(AlertJsonTest, NonFiniteNumbersAreNull) {
  Alert alert = SampleAlert();
  alert.value = kNaN;
  alert.expected = kInf;
  alert.z = -kInf;
  alert.statistic = -kNaN;
  alert.threshold = 0.0;
  const nlohmann::json j = Parse(AlertToJson(alert));
  EXPECT_TRUE(j.at("value").is_null());
  EXPECT_TRUE(j.at("expected").is_null());
  EXPECT_TRUE(j.at("z").is_null());
  EXPECT_TRUE(j.at("statistic").is_null());
  EXPECT_EQ(j.at("threshold").get<double>(), 0.0);
}

TEST(AlertJsonTest, NumbersUseTheShortestRoundTripForm) {
  // Shortest round-trip is std::to_chars' guarantee ([charconv.to.chars]); RFC 8259
  // allows exponents with a sign.
  const auto text = [](double v) {
    std::string out;
    AppendJsonNumber(v, &out);
    return out;
  };
  EXPECT_EQ(text(0.1), "0.1");
  EXPECT_EQ(text(101.25), "101.25");
  EXPECT_EQ(text(-3.0), "-3");
  EXPECT_EQ(text(1e300), "1e+300");
  for (const double v : {5e-324, std::numeric_limits<double>::max(), -0.0, 1.0 / 3.0, 6.02e23}) {
    const nlohmann::json parsed = Parse(text(v));
    ASSERT_TRUE(parsed.is_number()) << text(v);
    EXPECT_EQ(parsed.get<double>(), v) << text(v);
  }
}

TEST(AlertJsonTest, EscapesQuotesBackslashesAndControlCharacters) {
  // RFC 8259 §7: '"', '\\' and U+0000..U+001F must be escaped.
  std::string all_controls;
  for (int c = 0; c < 0x20; ++c) all_controls.push_back(static_cast<char>(c));
  for (const std::string& text :
       {std::string("say \"hi\""), std::string("C:\\path\\"), std::string("a\nb\r\nc\td"),
        std::string("\b\f"), all_controls, std::string("del \x7f and slash /"), std::string("")}) {
    EXPECT_EQ(RoundTrip(text), text);
  }
  std::string out;
  AppendJsonString(std::string("\x01\x1f\n\"\\", 5), &out);
  EXPECT_EQ(out, "\"\\u0001\\u001f\\n\\\"\\\\\"");
  // A NUL in the middle survives (string_view, not C string).
  const std::string with_nul("a\0b", 3);
  EXPECT_EQ(RoundTrip(with_nul), with_nul);
}

TEST(AlertJsonTest, ValidUtf8PassesThroughUnescaped) {
  for (const std::string& text :
       {std::string("5.1σ above"), std::string("m³/h"), std::string("Brackwater \xF0\x9F\x98\x80"),
        std::string("\xEF\xBF\xBF max BMP"), std::string("\xF4\x8F\xBF\xBF U+10FFFF")}) {
    std::string out;
    AppendJsonString(text, &out);
    EXPECT_EQ(out, "\"" + text + "\"") << "bytes copied as they are";
    EXPECT_EQ(RoundTrip(text), text);
  }
}

TEST(AlertJsonTest, IllFormedUtf8BecomesReplacementCharacters) {
  // Unicode Standard §3.9, "U+FFFD substitution of maximal subparts", Table 3-8 (from
  // memory); Python 3's bytes.decode("utf-8", "replace") gives the same for every case.
  const std::string r = "\xEF\xBF\xBD";
  const std::vector<std::pair<std::string, std::string>> cases = {
      {"\x61\xF1\x80\x80\xE1\x80\xC2\x62\x80\x63\x80\xBF\x64",
       "a" + r + r + r + "b" + r + "c" + r + r + "d"},  // Table 3-8
      {"\xFF", r},
      {"end \xC3", "end " + r},             // truncated at the end
      {"\xED\xA0\x80", r + r + r},          // a surrogate
      {"\xC0\xAF", r + r},                  // overlong '/'
      {"\xE0\x80\x80", r + r + r},          // overlong NUL
      {"\xF4\x90\x80\x80", r + r + r + r},  // above U+10FFFF
      {"\xE2\x82 euro", r + " euro"},       // truncated 3-byte
      {"\xF0\x9F\x98", r},                  // truncated 4-byte
  };
  for (const auto& [in, out] : cases) {
    EXPECT_EQ(RoundTrip(in), out);
  }
  // A whole alert with a broken channel name still parses.
  Alert alert = SampleAlert();
  alert.channel = "caf\xE9.flow";  // Latin-1 é
  EXPECT_EQ(Parse(AlertToJson(alert)).at("channel"), "caf" + r + ".flow");
}

TEST(TimestampFormatTest, MillisecondsRoundTowardsThePast) {
  // Instants as in the replay timestamp tests (Python 3 datetime for the epoch seconds).
  EXPECT_EQ(FormatUtcTimestamp(kInstant, SecondFraction::kMillis), "2026-03-09T10:54:34.000Z");
  EXPECT_EQ(FormatUtcTimestamp(kInstant + 123'999, SecondFraction::kMillis),
            "2026-03-09T10:54:34.123Z");
  EXPECT_EQ(FormatUtcTimestamp(-1, SecondFraction::kMillis), "1969-12-31T23:59:59.999Z");
  EXPECT_EQ(FormatUtcTimestamp(0, SecondFraction::kMillis), "1970-01-01T00:00:00.000Z");
  EXPECT_EQ(FormatUtcTimestamp(kInstant, SecondFraction::kMicrosIfAny), "2026-03-09T10:54:34Z");
  EXPECT_EQ(FormatUtcTimestamp(kInstant + 5, SecondFraction::kMicrosIfAny),
            "2026-03-09T10:54:34.000005Z");
  std::string appended = "ts=";
  AppendUtcTimestamp(kInstant, SecondFraction::kMillis, &appended);
  EXPECT_EQ(appended, "ts=2026-03-09T10:54:34.000Z");
}

TEST(TimestampFormatTest, CivilDaysMatchPythonDates) {
  // Day numbers from Python 3: (date(y, m, d) - date(1970, 1, 1)).days.
  EXPECT_EQ(DaysFromCivil(1970, 1, 1), 0);
  EXPECT_EQ(DaysFromCivil(2000, 3, 1), 11017);
  EXPECT_EQ(DaysFromCivil(2024, 2, 29), 19782);
  EXPECT_EQ(DaysFromCivil(1, 1, 1), -719162);
  // Inverse over 1200 years around the epoch, leap days included.
  for (std::int64_t days = -300'000; days <= 150'000; days += 7) {
    const CivilDate date = CivilFromDays(days);
    ASSERT_EQ(DaysFromCivil(date.year, date.month, date.day), days);
  }
  const CivilDate leap = CivilFromDays(19782);
  EXPECT_EQ(leap.year, 2024);
  EXPECT_EQ(leap.month, 2);
  EXPECT_EQ(leap.day, 29);
}

}  // namespace
}  // namespace nightjar::core
