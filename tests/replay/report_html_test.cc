// The replay report page: self-contained, escaped, thinned. The page's script is checked in a
// real browser by check_report_in_browser.py; here we check the HTML text and the JSON data
// block it draws from (parsed back with nlohmann::json).
//
// Escaping follows the HTML Living Standard (characters that end text or attributes:
// & < > " ') and RFC 8259 for JSON strings (common practice: also \u-escape < > & so the
// text can never close the <script> element). Replacement of invalid UTF-8 by U+FFFD is
// the Unicode "maximal subpart" practice, simplified to one U+FFFD per bad byte.
#include "replay/report_html.h"

#include <gtest/gtest.h>

#include <cmath>
#include <cstddef>
#include <limits>
#include <nlohmann/json.hpp>
#include <string>
#include <vector>

#include "replay/event_scoring.h"

namespace nightjar::replay {
namespace {

constexpr core::TimestampUs kUs = core::kMicrosPerSecond;
constexpr core::TimestampUs kDay = 1773014400 * kUs;  // 2026-03-09T00:00:00Z
constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

std::size_t CountOf(const std::string& text, const std::string& what) {
  std::size_t count = 0;
  for (std::size_t at = text.find(what); at != std::string::npos; at = text.find(what, at + 1)) {
    ++count;
  }
  return count;
}

// The page's JSON data block, parsed.
nlohmann::json DataOf(const std::string& page) {
  const std::string open = "<script type=\"application/json\" id=\"nj-data\">";
  const std::size_t begin = page.find(open);
  EXPECT_NE(begin, std::string::npos);
  if (begin == std::string::npos) return {};
  const std::size_t start = begin + open.size();
  const std::size_t end = page.find("</script>", start);
  EXPECT_NE(end, std::string::npos);
  return nlohmann::json::parse(page.substr(start, end - start), nullptr, false);
}

std::size_t NonNull(const nlohmann::json& array) {
  std::size_t n = 0;
  for (const nlohmann::json& x : array) n += x.is_null() ? 0 : 1;
  return n;
}

// One channel sampled every `period_s` from kDay, value = f(i).
template <typename F>
ReportChannel MakeChannel(const std::string& name, int samples, double period_s, F value) {
  ReportChannel channel;
  channel.name = name;
  for (int i = 0; i < samples; ++i) {
    channel.times.push_back(kDay + core::FromSeconds(period_s * i));
    const double v = value(i);
    channel.value.push_back(v);
    channel.expected.push_back(v + 0.5);
    channel.band.push_back(1.0);
    channel.ratio.push_back(0.25);
  }
  return channel;
}

core::Alert MakeAlert(const std::string& channel, double at_s, core::AlertPhase phase,
                      core::AlertKind kind = core::AlertKind::kAnomaly) {
  core::Alert alert;
  alert.time = kDay + core::FromSeconds(at_s);
  alert.channel = channel;
  alert.phase = phase;
  alert.kind = kind;
  alert.message = "msg " + channel;
  return alert;
}

TEST(ReportHtmlTest, EscapeHtml) {
  EXPECT_EQ(EscapeHtml("a<b>&\"'c"), "a&lt;b&gt;&amp;&quot;&#39;c");
  EXPECT_EQ(EscapeHtml("flow \xCF\x83 m\xC2\xB3/h"),
            "flow \xCF\x83 m\xC2\xB3/h");                         // valid UTF-8 kept
  EXPECT_EQ(EscapeHtml("x\xFFy"), "x\xEF\xBF\xBDy");              // stray byte -> U+FFFD
  EXPECT_EQ(EscapeHtml("\xE2\x82"), "\xEF\xBF\xBD\xEF\xBF\xBD");  // truncated sequence
  EXPECT_EQ(EscapeHtml("\xC0\xAF"), "\xEF\xBF\xBD\xEF\xBF\xBD");  // overlong '/'
  EXPECT_EQ(EscapeHtml("\xED\xA0\x80"), "\xEF\xBF\xBD\xEF\xBF\xBD\xEF\xBF\xBD");  // surrogate
  EXPECT_EQ(EscapeHtml(std::string("a\0b\x01", 4)),
            "a\xEF\xBF\xBD"
            "b\xEF\xBF\xBD");
  EXPECT_EQ(EscapeHtml("tab\tnl\n"), "tab\tnl\n");
}

TEST(ReportHtmlTest, JsonString) {
  EXPECT_EQ(JsonString("plain"), "\"plain\"");
  EXPECT_EQ(JsonString("</script>"), "\"\\u003c/script\\u003e\"");
  EXPECT_EQ(JsonString("a\"b\\c&"), "\"a\\\"b\\\\c\\u0026\"");
  EXPECT_EQ(JsonString("\n\r\t\x01"), "\"\\n\\r\\t\\u0001\"");
  EXPECT_EQ(JsonString("\xE2\x80\xA8\xE2\x80\xA9"), "\"\\u2028\\u2029\"");
  EXPECT_EQ(JsonString("\xF0\x9F\x8C\x8A"), "\"\xF0\x9F\x8C\x8A\"");  // 4-byte UTF-8 kept
  EXPECT_EQ(JsonString("\xFF"), "\"\xEF\xBF\xBD\"");
  // Round trip through a JSON parser.
  const std::string hostile = "</script><!-- \"x\" & 'y' \xCF\x83";
  EXPECT_EQ(nlohmann::json::parse(JsonString(hostile)).get<std::string>(), hostile);
}

TEST(ReportHtmlTest, SelfContainedPageWithOneChartPerChannel) {
  ReportInput input;
  input.file_name = "cw2_day.csv.gz";
  for (int c = 0; c < 3; ++c) {
    input.channels.push_back(
        MakeChannel("ch" + std::to_string(c), 100, 1.0, [](int i) { return 1.0 * i; }));
  }
  const std::string page = RenderReport(input);
  EXPECT_EQ(page.rfind("<!DOCTYPE html>", 0), 0u);
  EXPECT_EQ(CountOf(page, "<canvas"), 3u);
  EXPECT_EQ(CountOf(page, "<section class=\"nj-chart\">"), 3u);
  EXPECT_NE(page.find("<meta charset=\"utf-8\">"), std::string::npos);
  EXPECT_NE(page.find("default-src 'none'"), std::string::npos);  // the browser fetches nothing
  // Nothing that loads from elsewhere.
  for (const char* outside :
       {"http:", "https:", "//cdn", "<link", "@import", "url(", " src=", "@font-face"}) {
    EXPECT_EQ(page.find(outside), std::string::npos) << outside;
  }
  EXPECT_NE(page.find("body.dataset.ready = 'ok'"), std::string::npos);
  const nlohmann::json data = DataOf(page);
  ASSERT_TRUE(data.is_object());
  EXPECT_EQ(data["channels"].size(), 3u);
  EXPECT_EQ(data["origin"].get<double>(), 1773014400.0);
  EXPECT_EQ(data["span"].get<double>(), 99.0);
}

TEST(ReportHtmlTest, EscapesUserTextEverywhere) {
  const std::string hostile = "</script><img src=x onerror=alert(1)>\"&'";
  ReportInput input;
  input.title = "<title>";
  input.file_name = "<day>.csv";
  input.channels.push_back(MakeChannel(hostile, 10, 1.0, [](int) { return 1.0; }));
  input.channels.back().unit = "<u>";
  input.alerts.push_back(MakeAlert(hostile, 5, core::AlertPhase::kRaise));
  input.alerts.back().message = "<script>alert(2)</script>";
  input.windows.push_back({kDay, kDay + 2 * kUs, "<kind>"});
  input.scores.push_back({"<detector>", {}, std::nullopt});
  const std::string page = RenderReport(input);

  // The raw text appears nowhere; its escaped form does (heading, aria label, tables).
  EXPECT_EQ(page.find(hostile), std::string::npos);
  EXPECT_EQ(page.find("<img"), std::string::npos);
  EXPECT_EQ(page.find("<u>"), std::string::npos);
  EXPECT_EQ(page.find("<day>"), std::string::npos);
  EXPECT_EQ(page.find("<detector>"), std::string::npos);
  EXPECT_EQ(page.find("<script>alert(2)"), std::string::npos);
  const std::string escaped = EscapeHtml(hostile);
  EXPECT_GE(CountOf(page, escaped), 3u);  // chart heading, canvas label, alert list
  EXPECT_NE(page.find("&lt;detector&gt;"), std::string::npos);
  // Exactly our two scripts: the data block and the drawing code.
  EXPECT_EQ(CountOf(page, "<script"), 2u);
  EXPECT_EQ(CountOf(page, "</script>"), 2u);
  // The data block gives the name back exactly.
  const nlohmann::json data = DataOf(page);
  ASSERT_TRUE(data.is_object());
  EXPECT_EQ(data["channels"][0]["name"].get<std::string>(), hostile);
  EXPECT_EQ(data["channels"][0]["unit"].get<std::string>(), "<u>");
  EXPECT_EQ(data["windows"][0][3].get<std::string>(), "<kind>");
}

TEST(ReportHtmlTest, ShortSeriesAreKeptSampleForSample) {
  ReportInput input;
  input.channels.push_back(MakeChannel("c", 50, 2.0, [](int i) { return 0.5 * i; }));
  input.channels[0].expected[0] = kNaN;  // learning: no forecast yet
  input.channels[0].ratio[1] = std::numeric_limits<double>::infinity();
  const nlohmann::json data = DataOf(RenderReport(input));
  const nlohmann::json& c = data["channels"][0];
  ASSERT_EQ(c["x"].size(), 50u);
  for (int i = 0; i < 50; ++i) {
    EXPECT_DOUBLE_EQ(c["x"][i].get<double>(), 2.0 * i);
    EXPECT_DOUBLE_EQ(c["v"][i].get<double>(), 0.5 * i);
  }
  EXPECT_TRUE(c["e"][0].is_null());  // NaN -> null (drawn as a gap)
  EXPECT_TRUE(c["lo"][0].is_null());
  EXPECT_DOUBLE_EQ(c["e"][1].get<double>(), 1.0);  // 0.5 + 0.5
  // expected 1.0 -+ band 1.0
  EXPECT_DOUBLE_EQ(c["lo"][1].get<double>(), 0.0);
  EXPECT_DOUBLE_EQ(c["hi"][1].get<double>(), 2.0);
  EXPECT_TRUE(c["r"][1].is_null());  // not finite -> null
  EXPECT_DOUBLE_EQ(c["r"][2].get<double>(), 0.25);
}

TEST(ReportHtmlTest, ThinsADayOfOneSecondDataKeepingSpikes) {
  // Five channels, one day at 1 s (86 400 samples each), like the demo day.
  ReportInput input;
  for (int c = 0; c < 5; ++c) {
    input.channels.push_back(MakeChannel("cw2.ch" + std::to_string(c), 86400, 1.0, [c](int i) {
      const double base = 40.0 + c + 3.0 * std::sin(i * 7.2722e-5) + 0.01 * (i % 17);
      return i == 41234 ? base + 25.0 : base;  // a one-sample spike
    }));
  }
  input.alerts.push_back(MakeAlert("cw2.ch0", 41234, core::AlertPhase::kRaise));
  const std::string page = RenderReport(input);
  const nlohmann::json data = DataOf(page);
  ASSERT_EQ(data["channels"].size(), 5u);
  for (const nlohmann::json& c : data["channels"]) {
    for (const char* series : {"x", "v", "e", "lo", "hi", "r"}) {
      EXPECT_LE(NonNull(c[series]), 2000u) << series;
      EXPECT_GE(NonNull(c[series]), 1900u) << series;  // ~2 per bucket over the whole day
    }
    double peak = 0;
    for (const nlohmann::json& v : c["v"]) peak = std::max(peak, v.get<double>());
    EXPECT_GT(peak, 60.0) << c["name"];  // the spike (about 40 + c + 25) survived
  }
  // A day of 1 s data for five channels stays small (measured about 0.45 MB).
  EXPECT_LT(page.size(), 1'500'000u);
  std::printf("1-day 5-channel page: %zu bytes\n", page.size());

  // Another cap is honoured.
  input.max_points = 100;
  const nlohmann::json small = DataOf(RenderReport(input));
  EXPECT_LE(NonNull(small["channels"][0]["v"]), 100u);
}

TEST(ReportHtmlTest, GapsInTheSamplesBreakTheLines) {
  // 1 s samples with a 600 s hole (like the level dropout); raw and thinned.
  for (int samples : {300, 20000}) {
    ReportChannel channel;
    channel.name = "level";
    for (int i = 0; i < samples; ++i) {
      const int t = i < samples / 2 ? i : i + 600;
      channel.times.push_back(kDay + t * kUs);
      channel.value.push_back(65.0);
    }
    ReportInput input;
    input.channels.push_back(channel);
    const nlohmann::json data = DataOf(RenderReport(input));
    const nlohmann::json& c = data["channels"][0];
    std::size_t breaks = 0;
    for (std::size_t i = 0; i < c["v"].size(); ++i) {
      if (!c["v"][i].is_null()) continue;
      ++breaks;
      // The break sits inside the hole.
      EXPECT_GT(c["x"][i].get<double>(), samples / 2 - 1.0);
      EXPECT_LT(c["x"][i].get<double>(), samples / 2 + 600.0);
    }
    EXPECT_EQ(breaks, 1u) << samples;
  }
}

TEST(ReportHtmlTest, HeaderAlertsWindowsAndScores) {
  ReportInput input;
  input.file_name = "cw2_day.csv.gz";
  input.channels.push_back(MakeChannel("a", 3601, 1.0, [](int) { return 1.0; }));
  input.channels.push_back(MakeChannel("b", 3601, 1.0, [](int) { return 2.0; }));
  input.alerts = {MakeAlert("a", 10, core::AlertPhase::kRaise),
                  MakeAlert("a", 20, core::AlertPhase::kClear),
                  MakeAlert("b", 1000, core::AlertPhase::kRaise, core::AlertKind::kSensor),
                  MakeAlert("a", 2000, core::AlertPhase::kRaise),
                  MakeAlert("gone", 3000, core::AlertPhase::kRaise)};  // no chart: counted only
  input.windows = {{kDay + 5 * kUs, kDay + 15 * kUs, "anomaly"},
                   {kDay + 100 * kUs, kDay + 200 * kUs, "event"},
                   {kDay + 300 * kUs, kDay + 300 * kUs, "cleaning"}};
  const std::vector<Raise> raises = RaisesOf(input.alerts);
  const std::vector<std::string> names = {"a", "b"};
  input.scores.push_back(
      {"nightjar", ScoreEventsByChannel(raises, input.windows, names, 3601), PointScores{}});
  const std::string page = RenderReport(input);

  EXPECT_NE(page.find("<dd>cw2_day.csv.gz</dd>"), std::string::npos);
  EXPECT_NE(page.find("2026-03-09T00:00:00Z \xE2\x80\x93 2026-03-09T01:00:00Z (1 h 00 min 00 s)"),
            std::string::npos);
  EXPECT_NE(page.find("<dd>2 (7202 samples)</dd>"), std::string::npos);
  EXPECT_NE(page.find("4 raised (3 anomaly, 1 sensor, 0 event), 1 cleared"), std::string::npos);
  EXPECT_NE(page.find("1 anomaly, 1 event, 1 other"), std::string::npos);
  // Headings count each chart's raises: a 2, b 1.
  EXPECT_NE(page.find("a <span class=\"nj-count\">2 raised</span>"), std::string::npos);
  EXPECT_NE(page.find("b <span class=\"nj-count\">1 raised</span>"), std::string::npos);
  // Score row: window [5, 15] found by the raise at 10 (delay 5 s); raises 4: true 1 (10 s),
  // false 3 (1000, 2000, 3000 s; outside [5, 15 + 60] and the event [100, 200 + 60]) -> precision
  // 0.250, recall 1.000, F1 = 2 * 0.25 / 1.25 = 0.400; false per day = 3 / (3601 / 86400) = 72.0
  // (to one decimal). Point precision, recall and F1 of empty counts = 1 each.
  EXPECT_NE(page.find("<tr><td>nightjar</td><td>1 / 1</td><td>1.000</td><td>4</td><td>1</td>"
                      "<td>0</td><td>3</td><td>72.0</td><td>0.250</td><td>0.400</td>"
                      "<td>5 s</td><td>1.000</td><td>1.000</td><td>1.000</td></tr>"),
            std::string::npos);
  EXPECT_NE(page.find("<th>point precision</th><th>point recall</th><th>point F1</th>"),
            std::string::npos);
  // Markers and windows in the data block.
  const nlohmann::json data = DataOf(page);
  ASSERT_EQ(data["channels"][0]["alerts"].size(), 3u);
  EXPECT_EQ(data["channels"][0]["alerts"][0], nlohmann::json::parse("[10,1,0]"));
  EXPECT_EQ(data["channels"][0]["alerts"][1], nlohmann::json::parse("[20,0,0]"));
  EXPECT_EQ(data["channels"][1]["alerts"][0], nlohmann::json::parse("[1000,1,1]"));
  ASSERT_EQ(data["windows"].size(), 3u);
  EXPECT_EQ(data["windows"][0], nlohmann::json::parse("[5,15,0,\"anomaly\"]"));
  EXPECT_EQ(data["windows"][1][2], 1);
  EXPECT_EQ(data["windows"][2][2], 2);
  // The alert list shows all five, newest last.
  EXPECT_NE(page.find("Alert list (5)"), std::string::npos);
  EXPECT_EQ(CountOf(page, "msg "), 5u);
}

TEST(ReportHtmlTest, AlertListIsCapped) {
  ReportInput input;
  input.channels.push_back(MakeChannel("a", 10, 1.0, [](int) { return 1.0; }));
  for (int i = 0; i < 7; ++i) input.alerts.push_back(MakeAlert("a", i, core::AlertPhase::kRaise));
  input.max_listed_alerts = 4;
  const std::string page = RenderReport(input);
  EXPECT_EQ(CountOf(page, "msg a"), 4u);
  EXPECT_NE(page.find("3 more not listed."), std::string::npos);
  EXPECT_EQ(DataOf(page)["channels"][0]["alerts"].size(), 7u);  // markers: all of them
}

TEST(ReportHtmlTest, ShortVectorsAndEmptyInput) {
  ReportInput input;
  input.channels.push_back(MakeChannel("a", 10, 1.0, [](int) { return 1.0; }));
  input.channels[0].value.resize(4);  // 6 values missing: padded with NaN
  input.channels[0].ratio.clear();    // no ratio at all
  const nlohmann::json data = DataOf(RenderReport(input));
  const nlohmann::json& c = data["channels"][0];
  ASSERT_EQ(c["v"].size(), 10u);
  EXPECT_EQ(NonNull(c["v"]), 4u);
  EXPECT_EQ(NonNull(c["r"]), 0u);

  const std::string empty = RenderReport(ReportInput{});
  EXPECT_EQ(CountOf(empty, "<canvas"), 0u);
  const nlohmann::json none = DataOf(empty);
  ASSERT_TRUE(none.is_object());
  EXPECT_TRUE(none["channels"].empty());
  EXPECT_NE(empty.find("0 raised"), std::string::npos);
}

}  // namespace
}  // namespace nightjar::replay
