// render_report_main: writes a replay report page for the browser check
// (tests/replay/check_report_in_browser.py) and for looking at the page by hand.
//
//   render_report_main --synthetic OUT.html
//       three invented channels over one day at 10 s (one with a hostile name), the
//       static-limits baseline's alerts, labelled windows of three kinds, two score rows.
//   render_report_main --recording DAY.csv[.gz] OUT.html
//       a recorded day replayed through the engine with the "next = last" forecaster
//       (fast, same charts and alarms) and through the static-limits baseline, scored
//       against DAY.labels.csv: the shape of page `nightjar replay` makes.
//
// Prints "charts=<channels> bytes=<page size>" on success; exit 1 with a message on error.
#include <cmath>
#include <cstdio>
#include <fstream>
#include <limits>
#include <random>
#include <string>
#include <string_view>
#include <vector>

#include "core/alert.h"
#include "core/engine.h"
#include "core/engine_options.h"
#include "replay/event_scoring.h"
#include "replay/labels.h"
#include "replay/recording_reader.h"
#include "replay/report_html.h"
#include "replay/static_limits_baseline.h"
#include "replay/timestamp.h"

namespace nightjar::replay {
namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

// The baseline's edges as alerts for the page. The baseline is a Shewhart individuals
// chart, so kSpike ("a single value beyond the individual-value limit") is its detector.
core::Alert ToAlert(const BaselineEdge& edge, double mean) {
  core::Alert alert;
  alert.time = edge.time;
  alert.channel = edge.channel;
  alert.kind = core::AlertKind::kAnomaly;
  alert.detector = core::Detector::kSpike;
  alert.phase = edge.phase;
  alert.value = edge.value;
  alert.expected = mean;
  alert.message = std::string(edge.phase == core::AlertPhase::kRaise ? "left" : "back inside") +
                  " the static limits";
  return alert;
}

ReportInput Synthetic() {
  const core::TimestampUs origin = *ParseTimestamp("2026-03-09T00:00:00Z");
  const std::vector<std::string> names = {"cw2.pump_a.flow", "cw2.tank.level",
                                          "</script><b id=\"x\">&amp; 'quoted' \xCF\x83"};
  const std::vector<std::string> units = {"m3/h", "%", "<unit>"};
  std::mt19937 rng(20260309);
  std::normal_distribution<double> noise(0.0, 1.0);
  StaticLimitsBaseline baseline3(720, 3.0, core::ChannelOptions{}.anomaly_alarm);
  StaticLimitsBaseline baseline4(720, 4.0, core::ChannelOptions{}.anomaly_alarm);
  std::vector<BaselineEdge> edges3;
  std::vector<BaselineEdge> edges4;

  ReportInput input;
  input.title = "nightjar replay report";
  input.file_name = "synthetic_day.csv.gz";
  input.windows = {
      {origin + 3 * 3600 * core::kMicrosPerSecond, origin + 4 * 3600 * core::kMicrosPerSecond,
       "anomaly"},
      {origin + 10 * 3600 * core::kMicrosPerSecond,
       origin + (10 * 3600 + 1500) * core::kMicrosPerSecond, "event"},
      {origin + 15 * 3600 * core::kMicrosPerSecond, origin + 15 * 3600 * core::kMicrosPerSecond,
       "anomaly"},
      {origin + 20 * 3600 * core::kMicrosPerSecond, origin + 21 * 3600 * core::kMicrosPerSecond,
       "maintenance"},
  };
  for (std::size_t c = 0; c < names.size(); ++c) {
    ReportChannel channel;
    channel.name = names[c];
    channel.unit = units[c];
    const double level = 50.0 + 10.0 * static_cast<double>(c);
    for (int i = 0; i < 8640; ++i) {
      const core::TimestampUs t = origin + core::TimestampUs{i} * 10 * core::kMicrosPerSecond;
      const double hours = static_cast<double>(i) / 360.0;
      if (c == 1 && hours >= 12.0 && hours < 12.5) continue;  // a dropout: no samples
      double value =
          level + 0.6 * std::sin(hours / 24.0 * 2.0 * 3.141592653589793) + 0.3 * noise(rng);
      if (hours >= 3.0 && hours < 4.0) value += 4.0;  // the step fault
      if (i == 15 * 360) value += 12.0;               // the spike at 15:00
      const bool learning = i < 720;
      const double expected =
          learning ? kNaN : level + 0.6 * std::sin(hours / 24.0 * 2.0 * 3.141592653589793);
      channel.times.push_back(t);
      channel.value.push_back(value);
      channel.expected.push_back(expected);
      channel.band.push_back(learning ? kNaN : 0.9);
      channel.ratio.push_back(learning ? kNaN : std::abs(value - expected) / 0.9 / 1.5);
      baseline3.Process(channel.name, t, value, edges3);
      baseline4.Process(channel.name, t, value, edges4);
    }
    input.channels.push_back(std::move(channel));
  }
  for (const BaselineEdge& edge : edges3) {
    input.alerts.push_back(ToAlert(edge, baseline3.limits(edge.channel)->mean));
  }
  const double duration_s = 86400.0;
  input.scores.push_back({baseline3.name(),
                          ScoreEventsByChannel(RaisesOf(edges3), input.windows, names, duration_s),
                          std::nullopt});
  input.scores.push_back({baseline4.name(),
                          ScoreEventsByChannel(RaisesOf(edges4), input.windows, names, duration_s),
                          std::nullopt});
  return input;
}

core::Result<ReportInput> FromRecording(const std::string& path) {
  core::Result<std::unique_ptr<RecordingReader>> reader = RecordingReader::Open(path);
  if (!reader.ok()) return reader.status();
  std::vector<LabelWindow> windows;
  core::Result<std::vector<LabelWindow>> labels = ReadLabels(LabelsPathFor(path));
  if (labels.ok()) {
    windows = std::move(*labels);
  } else if (labels.status().code() != core::StatusCode::kNotFound) {
    return labels.status();
  }
  const std::vector<std::string>& names = (*reader)->channels();

  core::EngineOptions options;
  options.defaults.forecaster = core::Forecaster::kLastValue;
  core::Engine engine(options);
  StaticLimitsBaseline baseline(options.defaults);
  std::vector<core::ChannelId> ids;
  for (const std::string& name : names) {
    core::Result<core::ChannelId> id = engine.AddChannel(name);
    if (!id.ok()) return id.status();
    ids.push_back(*id);
  }

  ReportInput input;
  input.file_name = path.substr(path.find_last_of('/') + 1);
  input.windows = windows;
  input.channels.resize(names.size());
  for (std::size_t c = 0; c < names.size(); ++c) input.channels[c].name = names[c];
  std::vector<BaselineEdge> baseline_edges;
  std::vector<std::vector<core::TimestampUs>> flag_times(names.size());
  core::TimestampUs first = 0;
  core::TimestampUs last = 0;
  bool any = false;
  RecordingRow row;
  for (;;) {
    core::Result<bool> more = (*reader)->Next(&row);
    if (!more.ok()) return more.status();
    if (!*more) break;
    if (!any) first = row.time;
    any = true;
    last = row.time;
    for (std::size_t c = 0; c < names.size(); ++c) {
      if (!row.values[c].has_value()) continue;
      const double value = *row.values[c];
      engine.Process(ids[c], row.time, value, input.alerts);
      baseline.Process(names[c], row.time, value, baseline_edges);
      const core::ChannelStatus status = engine.channel_status(ids[c]);
      const bool learning = status.state == core::ChannelState::kLearning;
      ReportChannel& channel = input.channels[c];
      channel.times.push_back(row.time);
      channel.value.push_back(value);
      channel.expected.push_back(learning ? kNaN : status.last_expected);
      channel.band.push_back(learning ? kNaN : 3.0 * status.last_residual_sigma);
      channel.ratio.push_back(learning ? kNaN : status.last_ratio);
    }
  }
  // One sample period past the last row: a day of 1 s rows lasts 86 400 s.
  const double duration_s = any ? core::ToSeconds(last - first) + 1.0 : 0.0;
  input.scores.push_back({"next = last",
                          ScoreEventsByChannel(RaisesOf(input.alerts), windows, names, duration_s),
                          std::nullopt});
  input.scores.push_back(
      {baseline.name(), ScoreEventsByChannel(RaisesOf(baseline_edges), windows, names, duration_s),
       std::nullopt});
  return input;
}

int Main(int argc, char** argv) {
  const std::vector<std::string_view> args(argv + 1, argv + argc);
  ReportInput input;
  std::string out_path;
  if (args.size() == 2 && args[0] == "--synthetic") {
    input = Synthetic();
    out_path = std::string(args[1]);
  } else if (args.size() == 3 && args[0] == "--recording") {
    core::Result<ReportInput> loaded = FromRecording(std::string(args[1]));
    if (!loaded.ok()) {
      std::fprintf(stderr, "render_report_main: %s\n", loaded.status().message().c_str());
      return 1;
    }
    input = std::move(*loaded);
    out_path = std::string(args[2]);
  } else {
    std::fprintf(stderr,
                 "usage: render_report_main --synthetic OUT.html\n"
                 "       render_report_main --recording DAY.csv[.gz] OUT.html\n");
    return 2;
  }
  const std::string page = RenderReport(input);
  std::ofstream out(out_path, std::ios::binary | std::ios::trunc);
  out << page;
  out.close();
  if (!out) {
    std::fprintf(stderr, "render_report_main: cannot write %s\n", out_path.c_str());
    return 1;
  }
  std::printf("charts=%zu bytes=%zu\n", input.channels.size(), page.size());
  return 0;
}

}  // namespace
}  // namespace nightjar::replay

int main(int argc, char** argv) { return nightjar::replay::Main(argc, argv); }
