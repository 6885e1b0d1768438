// The OpenMetrics text of the metrics endpoint. Expected texts are the examples of the
// OpenMetrics 1.0 specification (section "Histogram" for the histogram family and its
// le thresholds; the ABNF's escaped-string for label values and help), reproduced from
// memory; the full rendering is checked line by line against the format's rules.
#include "service/metrics_text.h"

#include <gtest/gtest.h>

#include <cmath>
#include <limits>
#include <map>
#include <sstream>
#include <string>
#include <vector>

namespace nightjar::service {
namespace {

TEST(MetricsTextTest, NumbersInTheSpecificationsCanonicalForm) {
  // OpenMetrics 1.0 specification, histogram example thresholds (from memory).
  EXPECT_EQ(FormatOpenMetricsNumber(0.0), "0.0");
  EXPECT_EQ(FormatOpenMetricsNumber(1e-05), "1e-05");
  EXPECT_EQ(FormatOpenMetricsNumber(0.0001), "0.0001");
  EXPECT_EQ(FormatOpenMetricsNumber(0.1), "0.1");
  EXPECT_EQ(FormatOpenMetricsNumber(1.0), "1.0");
  EXPECT_EQ(FormatOpenMetricsNumber(10.0), "10.0");
  EXPECT_EQ(FormatOpenMetricsNumber(100000.0), "100000.0");
  EXPECT_EQ(FormatOpenMetricsNumber(1e6), "1e+06");
  EXPECT_EQ(FormatOpenMetricsNumber(1e23), "1e+23");
  EXPECT_EQ(FormatOpenMetricsNumber(1.1e23), "1.1e+23");
  EXPECT_EQ(FormatOpenMetricsNumber(324789.3), "324789.3");
  EXPECT_EQ(FormatOpenMetricsNumber(std::numeric_limits<double>::infinity()), "+Inf");
  EXPECT_EQ(FormatOpenMetricsNumber(-std::numeric_limits<double>::infinity()), "-Inf");
  EXPECT_EQ(FormatOpenMetricsNumber(std::nan("")), "NaN");
  // Our own bucket bounds read back exactly (shortest round trip).
  for (const double v : {50e-6, 250e-6, 2.5e-3, 0.25}) {
    EXPECT_EQ(std::stod(FormatOpenMetricsNumber(v)), v);
  }
}

TEST(MetricsTextTest, HistogramMatchesTheSpecificationsExample) {
  // OpenMetrics 1.0 specification, section "Histogram", the family "foo" (from memory;
  // its foo_created line is left out: we write no created time).
  HistogramSnapshot h;
  h.upper_bounds = {0.0, 1e-05, 0.0001, 0.1, 1.0, 10.0, 100000.0, 1e6, 1e23, 1.1e23};
  h.counts = {0, 0, 5, 3, 2, 1, 0, 4, 1, 1, 0};  // per bucket; cumulative in the text
  h.sum = 324789.3;
  OpenMetricsWriter w;
  w.Family("foo", MetricType::kHistogram, "");
  w.Histogram("foo", h);
  EXPECT_EQ(w.Finish(),
            "# TYPE foo histogram\n"
            "foo_bucket{le=\"0.0\"} 0\n"
            "foo_bucket{le=\"1e-05\"} 0\n"
            "foo_bucket{le=\"0.0001\"} 5\n"
            "foo_bucket{le=\"0.1\"} 8\n"
            "foo_bucket{le=\"1.0\"} 10\n"
            "foo_bucket{le=\"10.0\"} 11\n"
            "foo_bucket{le=\"100000.0\"} 11\n"
            "foo_bucket{le=\"1e+06\"} 15\n"
            "foo_bucket{le=\"1e+23\"} 16\n"
            "foo_bucket{le=\"1.1e+23\"} 17\n"
            "foo_bucket{le=\"+Inf\"} 17\n"
            "foo_sum 324789.3\n"
            "foo_count 17\n"
            "# EOF\n");
}

TEST(MetricsTextTest, CounterGaugeUnitAndEscaping) {
  // OpenMetrics 1.0 ABNF (from memory): label values and help are escaped-strings, where
  // backslash, double quote and line feed are written \\ \" \n; counters carry _total.
  OpenMetricsWriter w;
  w.Family("a_seconds", MetricType::kCounter, "help with \"quotes\", a \\ and\na line feed",
           "seconds");
  const std::pair<std::string_view, std::string_view> labels[] = {{"x", "say \"hi\"\\\n"},
                                                                  {"y", "plain"}};
  w.Counter("a_seconds", labels, 42);
  w.Family("b", MetricType::kGauge, "a gauge");
  w.Gauge("b", {}, -3);
  EXPECT_EQ(w.Finish(),
            "# TYPE a_seconds counter\n"
            "# UNIT a_seconds seconds\n"
            "# HELP a_seconds help with \\\"quotes\\\", a \\\\ and\\na line feed\n"
            "a_seconds_total{x=\"say \\\"hi\\\"\\\\\\n\",y=\"plain\"} 42\n"
            "# TYPE b gauge\n"
            "# HELP b a gauge\n"
            "b -3\n"
            "# EOF\n");
}

std::vector<std::string> Lines(const std::string& text) {
  std::vector<std::string> out;
  std::istringstream in(text);
  for (std::string line; std::getline(in, line);) out.push_back(line);
  return out;
}

TEST(MetricsTextTest, DaemonMetricsAreWellFormedAndCarryTheSnapshot) {
  MetricsSnapshot s;
  s.samples_received = 1207;
  s.samples_processed = 1200;
  s.samples_dropped = 7;
  s.bad_payloads = 3;
  s.unmapped = 1;
  s.alerts_by_kind = {2, 0, 1};
  s.channels_by_state = {1, 2, 1, 0};
  s.latency.upper_bounds = {0.001, 0.01};
  s.latency.counts = {1100, 90, 10};
  s.latency.sum = 1.5;
  const std::string text = FormatMetrics(s);
  const std::vector<std::string> lines = Lines(text);
  ASSERT_FALSE(lines.empty());
  EXPECT_EQ(lines.back(), "# EOF");
  EXPECT_EQ(text.back(), '\n');

  // Every sample belongs to the family declared last (common practice of the format: a
  // family's samples follow its descriptors), and its suffix fits the type.
  std::map<std::string, std::string> type_of;
  std::map<std::string, std::string> value_of;
  std::string family;
  for (std::size_t i = 0; i + 1 < lines.size(); ++i) {
    const std::string& line = lines[i];
    if (line.rfind("# TYPE ", 0) == 0) {
      std::istringstream in(line.substr(7));
      std::string type;
      in >> family >> type;
      EXPECT_EQ(type_of.count(family), 0u) << "family declared twice: " << family;
      type_of[family] = type;
      continue;
    }
    if (line.rfind("# HELP ", 0) == 0 || line.rfind("# UNIT ", 0) == 0) {
      EXPECT_EQ(line.substr(7, family.size() + 1), family + " ") << line;
      continue;
    }
    ASSERT_NE(line[0], '#') << line;
    const std::size_t space = line.rfind(' ');
    ASSERT_NE(space, std::string::npos) << line;
    const std::string key = line.substr(0, space);
    ASSERT_EQ(key.rfind(family, 0), 0u) << line << " outside family " << family;
    const std::string suffix = key.substr(family.size(), key.find('{') - family.size());
    if (type_of[family] == "counter") {
      EXPECT_EQ(suffix, "_total") << line;
    }
    if (type_of[family] == "gauge") {
      EXPECT_EQ(suffix, "") << line;
    }
    if (type_of[family] == "histogram") {
      EXPECT_TRUE(suffix == "_bucket" || suffix == "_sum" || suffix == "_count") << line;
    }
    value_of[key] = line.substr(space + 1);
  }
  EXPECT_EQ(value_of["nightjar_samples_received_total"], "1207");
  EXPECT_EQ(value_of["nightjar_samples_processed_total"], "1200");
  EXPECT_EQ(value_of["nightjar_samples_dropped_total"], "7");
  EXPECT_EQ(value_of["nightjar_payloads_bad_total"], "3");
  EXPECT_EQ(value_of["nightjar_messages_unmapped_total"], "1");
  EXPECT_EQ(value_of["nightjar_alerts_published_total{kind=\"anomaly\"}"], "2");
  EXPECT_EQ(value_of["nightjar_alerts_published_total{kind=\"event\"}"], "0");
  EXPECT_EQ(value_of["nightjar_alerts_published_total{kind=\"sensor\"}"], "1");
  EXPECT_EQ(value_of["nightjar_channels{state=\"learning\"}"], "1");
  EXPECT_EQ(value_of["nightjar_channels{state=\"armed\"}"], "2");
  EXPECT_EQ(value_of["nightjar_channels{state=\"in_alarm\"}"], "1");
  EXPECT_EQ(value_of["nightjar_channels{state=\"stale\"}"], "0");
  EXPECT_EQ(value_of["nightjar_sample_latency_seconds_bucket{le=\"0.001\"}"], "1100");
  EXPECT_EQ(value_of["nightjar_sample_latency_seconds_bucket{le=\"0.01\"}"], "1190");
  EXPECT_EQ(value_of["nightjar_sample_latency_seconds_bucket{le=\"+Inf\"}"], "1200");
  EXPECT_EQ(value_of["nightjar_sample_latency_seconds_count"], "1200");
  EXPECT_EQ(value_of["nightjar_sample_latency_seconds_sum"], "1.5");
  EXPECT_NE(text.find("# UNIT nightjar_sample_latency_seconds seconds\n"), std::string::npos);
}

}  // namespace
}  // namespace nightjar::service
