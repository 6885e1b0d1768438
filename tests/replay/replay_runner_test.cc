// Replay end to end on small synthetic recordings written by the tests: what the engine
// raises on an injected step and bad samples, exact repetition, bad input naming its
// line and column, parallel jobs matching one-at-a-time runs, and the alarm-rate, flood
// and label arithmetic of the summary.
#include "replay/replay_runner.h"

#include <gtest/gtest.h>

#include <array>
#include <cmath>
#include <cstdint>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <iterator>
#include <nlohmann/json.hpp>
#include <numbers>
#include <random>
#include <sstream>
#include <string>
#include <vector>

#include "core/alert_json.h"
#include "replay/replay_summary.h"
#include "replay/timestamp.h"

namespace nightjar::replay {
namespace {

constexpr core::TimestampUs kUs = core::kMicrosPerSecond;
constexpr core::TimestampUs kDay = 1773014400 * kUs;  // 2026-03-09T00:00:00Z
constexpr std::size_t kFlow = 0;
constexpr std::size_t kTemp = 1;

core::TimestampUs At(int row) { return kDay + row * kUs; }

std::string TempPath(const std::string& name) {
  const ::testing::TestInfo* info = ::testing::UnitTest::GetInstance()->current_test_info();
  return ::testing::TempDir() + "nightjar_runner_" + info->test_suite_name() + "_" + info->name() +
         "_" + name;
}

std::string WriteText(const std::string& name, const std::string& content) {
  std::string path = TempPath(name);
  std::ofstream out(path, std::ios::binary | std::ios::trunc);
  out << content;
  EXPECT_TRUE(out.good()) << path;
  return path;
}

std::string ReadText(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  EXPECT_TRUE(in.good()) << path;
  return {std::istreambuf_iterator<char>(in), std::istreambuf_iterator<char>()};
}

// Two channels at 1 Hz from 2026-03-09T00:00:00Z: a flow (50 m3/h, 5-minute swing, noise
// sd 0.3) and a slow temperature (noise sd 0.05), with optional faults.
struct Synthetic {
  int rows = 1200;
  std::uint64_t seed = 7;
  int step_at = -1;  // flow +4.0 (13 noise sigmas) on rows [step_at, step_at + step_rows)
  int step_rows = 200;
  int nan_at = -1;       // flow cell "nan" on this row
  int empty_at = -1;     // temp cell empty on this row
  int silent_from = -1;  // temp cells empty on rows [silent_from, silent_from + silent_rows)
  int silent_rows = 0;
  bool all_silent = false;  // flow silent on those rows too: rows with no sample at all
};

std::string SyntheticCsv(const Synthetic& s) {
  std::mt19937_64 rng(s.seed);
  std::normal_distribution<double> noise(0.0, 1.0);
  std::string csv = "timestamp,skid.flow,skid.temp\n";
  for (int i = 0; i < s.rows; ++i) {
    double flow = 50.0 + 5.0 * std::sin(2.0 * std::numbers::pi * i / 300.0) + 0.3 * noise(rng);
    const double temp =
        40.0 + 0.5 * std::sin(2.0 * std::numbers::pi * i / 900.0) + 0.05 * noise(rng);
    if (i >= s.step_at && i < s.step_at + s.step_rows && s.step_at >= 0) flow += 4.0;
    std::array<char, 64> cells{};
    std::snprintf(cells.data(), cells.size(), "%.3f", flow);
    const bool silent =
        s.silent_from >= 0 && i >= s.silent_from && i < s.silent_from + s.silent_rows;
    const std::string flow_cell =
        i == s.nan_at ? "nan" : (silent && s.all_silent ? "" : cells.data());
    std::snprintf(cells.data(), cells.size(), "%.3f", temp);
    const std::string temp_cell = (i == s.empty_at || silent) ? "" : cells.data();
    csv += FormatTimestamp(At(i));
    csv += ',';
    csv += flow_cell;
    csv += ',';
    csv += temp_cell;
    csv += '\n';
  }
  return csv;
}

// Short warm-up and a small model so a few hundred samples arm the channel quickly.
ReplayOptions FastOptions() {
  ReplayOptions options;
  options.engine.seed = 5;
  options.engine.defaults.warmup_samples = 300;
  options.engine.defaults.scaler.warmup_samples = 60;
  options.engine.defaults.predictor.hidden_size = 8;
  options.engine.defaults.predictor.window = 8;
  options.engine.defaults.time_of_day_features = false;
  return options;
}

struct Collected {
  ReplayOutcome outcome;
  std::vector<core::Alert> alerts;
  std::string jsonl;  // the alerts as alerts.jsonl would hold them
};

Collected Replay(const std::string& path, const ReplayOptions& options,
                 ReplayCallbacks callbacks = {}) {
  Collected run;
  callbacks.on_alert = [&run](const core::Alert& alert) {
    run.alerts.push_back(alert);
    run.jsonl += core::AlertToJson(alert) + "\n";
    return core::Status::Ok();
  };
  run.outcome = RunReplay(path, options, callbacks);
  return run;
}

std::string Describe(const std::vector<core::Alert>& alerts) {
  std::string text;
  for (const core::Alert& a : alerts) text += core::AlertToJson(a) + "\n";
  return text;
}

const core::Alert* FirstRaise(const std::vector<core::Alert>& alerts, core::Detector detector,
                              const std::string& channel) {
  for (const core::Alert& a : alerts) {
    if (a.phase == core::AlertPhase::kRaise && a.detector == detector && a.channel == channel) {
      return &a;
    }
  }
  return nullptr;
}

const core::Alert* FirstAnomalyRaiseFrom(const std::vector<core::Alert>& alerts,
                                         core::TimestampUs from) {
  for (const core::Alert& a : alerts) {
    if (a.phase == core::AlertPhase::kRaise && a.kind == core::AlertKind::kAnomaly &&
        a.time >= from) {
      return &a;
    }
  }
  return nullptr;
}

constexpr int kStepAt = 650;
constexpr int kNanAt = 400;
constexpr int kEmptyAt = 250;
constexpr int kRows = 800;

Synthetic StepDay() {
  return Synthetic{
      .rows = kRows, .step_at = kStepAt, .step_rows = 100, .nan_at = kNanAt, .empty_at = kEmptyAt};
}

TEST(ReplayRunnerTest, RaisesTheSensorAlertAndTheStepAnomaly) {
  const std::string path = WriteText("step.csv", SyntheticCsv(StepDay()));
  std::int64_t traced = 0;
  std::int64_t traced_unused = 0;
  std::int64_t progress_calls = 0;
  ReplayCallbacks callbacks;
  callbacks.on_sample = [&](const TracePoint& point) {
    ++traced;
    if (!point.used) {
      ++traced_unused;
      EXPECT_EQ(point.time, At(kNanAt));
      EXPECT_EQ(point.channel_name, "skid.flow");
      EXPECT_TRUE(std::isnan(point.value));
    }
    if (point.time == At(kStepAt - 1) && point.channel == kFlow) {
      // Armed well before the step: a forecast and a band to draw.
      EXPECT_EQ(point.state, core::ChannelState::kArmed);
      EXPECT_NEAR(point.expected, point.value, 2.0);
      EXPECT_GT(point.residual_sigma, 0.0);
      EXPECT_LT(point.ratio, 1.0);
    }
  };
  callbacks.on_progress = [&](const ReplayProgress&) { ++progress_calls; };
  const Collected run = Replay(path, FastOptions(), callbacks);
  ASSERT_TRUE(run.outcome.status.ok()) << run.outcome.status.message();
  SCOPED_TRACE(Describe(run.alerts));

  // The NaN: a not-finite sensor alert at once, cleared by the next good samples.
  const core::Alert* nan = FirstRaise(run.alerts, core::Detector::kNotFinite, "skid.flow");
  ASSERT_NE(nan, nullptr);
  EXPECT_EQ(nan->time, At(kNanAt));
  EXPECT_EQ(nan->kind, core::AlertKind::kSensor);
  // The step is raised within ten samples of the 15 s default on-delay (the bound of
  // engine_test's step test). The
  // small fast-learning model leaves residuals of ~0.5 (not the noise's 0.3), so the step
  // is 4.0: ~8 residual sigmas, beyond the spike limit.
  const core::Alert* step = FirstAnomalyRaiseFrom(run.alerts, At(kStepAt));
  ASSERT_NE(step, nullptr);
  EXPECT_EQ(step->channel, "skid.flow");
  EXPECT_GE(step->time, At(kStepAt + 15));
  EXPECT_LE(step->time, At(kStepAt + 15 + 10));
  EXPECT_GT(step->z, 0.0);
  EXPECT_EQ(FirstAnomalyRaiseFrom(run.alerts, 0)->time, step->time) << "quiet before the step";

  // Alerts come in time order.
  for (std::size_t i = 1; i < run.alerts.size(); ++i) {
    EXPECT_LE(run.alerts[i - 1].time, run.alerts[i].time);
  }

  const ReplaySummary& s = run.outcome.summary;
  EXPECT_EQ(s.rows, kRows);
  EXPECT_EQ(s.empty_cells, 1);
  EXPECT_EQ(s.samples, 2 * kRows - 1);
  EXPECT_EQ(s.rejected_samples, 1);  // the NaN
  EXPECT_EQ(s.skipped_rows, 0);
  EXPECT_EQ(traced, s.samples);
  EXPECT_EQ(traced_unused, 1);
  EXPECT_EQ(progress_calls, kRows / kProgressEveryRows + 1);
  ASSERT_EQ(s.channels.size(), 2u);
  EXPECT_EQ(s.channels[kFlow].name, "skid.flow");
  EXPECT_EQ(s.channels[kFlow].samples, kRows);
  EXPECT_EQ(s.channels[kFlow].rejected, 1);
  EXPECT_EQ(s.channels[kTemp].samples, kRows - 1);
  EXPECT_EQ(s.channels[kTemp].final_state, core::ChannelState::kArmed);
  EXPECT_DOUBLE_EQ(s.channels[kFlow].sample_period_s, 1.0);
  // skid.flow and skid.temp are one asset: each model takes the other as context.
  EXPECT_EQ(s.channels[kFlow].context, std::vector<std::string>{"skid.temp"});
  EXPECT_EQ(s.channels[kTemp].context, std::vector<std::string>{"skid.flow"});
  EXPECT_EQ(s.first_time, At(0));
  EXPECT_EQ(s.last_time, At(kRows - 1));
  EXPECT_DOUBLE_EQ(s.span_s(), kRows - 1.0);
  EXPECT_GT(s.wall_s, 0.0);

  // The counts agree with the alerts handed out.
  std::int64_t raises = 0;
  for (const core::Alert& a : run.alerts) raises += a.phase == core::AlertPhase::kRaise ? 1 : 0;
  EXPECT_EQ(s.alerts.raises(), raises);
  EXPECT_EQ(s.alerts.raises() + s.alerts.clears(), static_cast<std::int64_t>(run.alerts.size()));
  EXPECT_EQ(static_cast<std::int64_t>(s.raises.size()), raises);
  EXPECT_EQ(s.channels[kFlow].alerts.Get(core::AlertKind::kSensor, core::AlertPhase::kRaise), 1);
  EXPECT_GE(s.channels[kFlow].alerts.Get(core::AlertKind::kAnomaly, core::AlertPhase::kRaise), 1);
}

TEST(ReplayRunnerTest, SilentChannelRaisesAGapWhileTheOtherGoesOn) {
  // temp sends nothing for 40 rows: past 10 sample periods (SensorHealthOptions default)
  // the clock, moved by the flow's rows, raises the gap; the next sample clears it.
  const std::string path = WriteText(
      "silent.csv", SyntheticCsv(Synthetic{.rows = 300, .silent_from = 150, .silent_rows = 40}));
  const Collected run = Replay(path, FastOptions());
  ASSERT_TRUE(run.outcome.status.ok()) << run.outcome.status.message();
  SCOPED_TRACE(Describe(run.alerts));
  const core::Alert* gap = FirstRaise(run.alerts, core::Detector::kGap, "skid.temp");
  ASSERT_NE(gap, nullptr);
  // Last sample at row 149; more than 10 s without one first holds at row 160.
  EXPECT_GE(gap->time, At(159));
  EXPECT_LE(gap->time, At(161));
  bool cleared = false;
  for (const core::Alert& a : run.alerts) {
    cleared |= a.detector == core::Detector::kGap && a.phase == core::AlertPhase::kClear &&
               a.time >= At(190);
  }
  EXPECT_TRUE(cleared);
  EXPECT_EQ(run.outcome.summary.empty_cells, 40);
}

TEST(ReplayRunnerTest, RowsWithoutSamplesStillMoveTheClock) {
  // Both channels silent for 40 rows: only the rows' times tell the engine that time
  // passes, and both gaps are raised while the silence lasts.
  const std::string path = WriteText(
      "silent.csv", SyntheticCsv(Synthetic{
                        .rows = 300, .silent_from = 150, .silent_rows = 40, .all_silent = true}));
  const Collected run = Replay(path, FastOptions());
  ASSERT_TRUE(run.outcome.status.ok()) << run.outcome.status.message();
  SCOPED_TRACE(Describe(run.alerts));
  for (const char* channel : {"skid.flow", "skid.temp"}) {
    const core::Alert* gap = FirstRaise(run.alerts, core::Detector::kGap, channel);
    ASSERT_NE(gap, nullptr) << channel;
    EXPECT_GE(gap->time, At(159));
    EXPECT_LT(gap->time, At(190)) << "raised during the silence, not when samples resume";
  }
  EXPECT_EQ(run.outcome.summary.empty_cells, 80);
}

TEST(ReplayRunnerTest, RepeatsExactly) {
  const std::string path = WriteText("step.csv", SyntheticCsv(StepDay()));
  const Collected first = Replay(path, FastOptions());
  const Collected second = Replay(path, FastOptions());
  ASSERT_TRUE(first.outcome.status.ok());
  ASSERT_FALSE(first.alerts.empty());
  EXPECT_EQ(first.jsonl, second.jsonl);
  // Another seed gives another model: the alerts are still there, the numbers differ.
  ReplayOptions other = FastOptions();
  other.engine.seed = 6;
  const Collected reseeded = Replay(path, other);
  EXPECT_NE(first.jsonl, reseeded.jsonl);
}

std::string BadCsv(const std::string& bad_line, int at_line) {
  std::string csv = "timestamp,skid.flow,skid.temp\n";
  for (int line = 2; line <= 6; ++line) {
    if (line == at_line) {
      csv += bad_line + "\n";
    } else {
      csv += FormatTimestamp(At(line)) + ",50.0,40.0\n";
    }
  }
  return csv;
}

TEST(ReplayRunnerTest, BadRowStopsWithItsLineAndColumn) {
  const std::string path =
      WriteText("bad.csv", BadCsv(FormatTimestamp(At(3)) + ",50.0,abc", /*at_line=*/3));
  const Collected run = Replay(path, FastOptions());
  ASSERT_FALSE(run.outcome.status.ok());
  EXPECT_EQ(run.outcome.status.code(), core::StatusCode::kInvalidArgument);
  EXPECT_EQ(run.outcome.status.message().rfind(path + ":3:3: channel 'skid.temp': ", 0), 0u)
      << run.outcome.status.message();
  EXPECT_EQ(run.outcome.summary.rows, 1) << "the row before it was replayed";
  EXPECT_EQ(run.outcome.summary.samples, 2);
}

TEST(ReplayRunnerTest, SkipBadRowsCountsAndGoesOn) {
  std::string csv = BadCsv(FormatTimestamp(At(3)) + ",50.0,abc", 3);
  csv += FormatTimestamp(At(7)) + ",50.0\n";  // too few cells
  const std::string path = WriteText("bad.csv", csv);
  ReplayOptions options = FastOptions();
  options.reader.skip_bad_rows = true;
  const Collected run = Replay(path, options);
  ASSERT_TRUE(run.outcome.status.ok()) << run.outcome.status.message();
  const ReplaySummary& s = run.outcome.summary;
  EXPECT_EQ(s.skipped_rows, 2);
  EXPECT_EQ(s.rows, 4);
  EXPECT_EQ(s.samples, 8);
  EXPECT_EQ(s.first_skip_reason.rfind(path + ":3:3:", 0), 0u) << s.first_skip_reason;
}

TEST(ReplayRunnerTest, OutOfOrderRowNamesItsLine) {
  // Line 5 goes back to row 2's time.
  const std::string path = WriteText("order.csv", BadCsv(FormatTimestamp(At(2)) + ",50,40", 5));
  const Collected run = Replay(path, FastOptions());
  ASSERT_FALSE(run.outcome.status.ok());
  const std::string& message = run.outcome.status.message();
  EXPECT_EQ(message.rfind(path + ":5:1: ", 0), 0u) << message;
  EXPECT_NE(message.find("earlier than"), std::string::npos) << message;
  EXPECT_EQ(run.outcome.summary.rows, 3);

  ReplayOptions skipping = FastOptions();
  skipping.reader.skip_bad_rows = true;
  const Collected skipped = Replay(path, skipping);
  ASSERT_TRUE(skipped.outcome.status.ok());
  EXPECT_EQ(skipped.outcome.summary.out_of_order_rows, 1);
  EXPECT_EQ(skipped.outcome.summary.skipped_rows, 1);
}

TEST(ReplayRunnerTest, ChannelTheOptionsRejectIsAnErrorNamingIt) {
  const std::string path = WriteText("ok.csv", BadCsv(FormatTimestamp(At(3)) + ",1,2", 3));
  ReplayOptions options = FastOptions();
  options.resolver = [](std::string_view channel) {
    core::ChannelOptions o = FastOptions().engine.defaults;
    if (channel == "skid.temp") o.predictor.hidden_size = 0;
    return o;
  };
  const Collected run = Replay(path, options);
  ASSERT_FALSE(run.outcome.status.ok());
  const std::string& message = run.outcome.status.message();
  EXPECT_EQ(message.rfind(path + ":1:3: channel 'skid.temp': ", 0), 0u) << message;
  EXPECT_NE(message.find("hidden_size"), std::string::npos) << message;
}

TEST(ReplayRunnerTest, MissingRecordingIsNotFound) {
  const Collected run = Replay(TempPath("nowhere.csv"), FastOptions());
  EXPECT_EQ(run.outcome.status.code(), core::StatusCode::kNotFound);
}

TEST(ReplayRunnerTest, AlertSinkFailureStopsTheReplay) {
  const std::string path = WriteText("step.csv", SyntheticCsv(StepDay()));
  ReplayCallbacks callbacks;
  int seen = 0;
  callbacks.on_alert = [&seen](const core::Alert&) {
    ++seen;
    return core::Status::Unavailable("disk full");
  };
  const ReplayOutcome outcome = RunReplay(path, FastOptions(), callbacks);
  EXPECT_EQ(outcome.status.code(), core::StatusCode::kUnavailable);
  EXPECT_EQ(seen, 1);
  EXPECT_EQ(outcome.summary.rows, kNanAt + 1) << "stopped at the NaN's row";
}

nlohmann::json WithoutTiming(const std::string& summary_json) {
  nlohmann::json j = nlohmann::json::parse(summary_json, nullptr, false);
  EXPECT_FALSE(j.is_discarded()) << summary_json;
  if (j.is_object()) j.erase("timing");
  return j;
}

TEST(ReplayRunnerTest, DirectoryOutputMatchesTheAlertsAndCounts) {
  const std::string input = WriteText("step.csv", SyntheticCsv(StepDay()));
  const std::string labels = WriteText(
      "step.labels.csv",
      "start,end,kind\n" + FormatTimestamp(At(kStepAt)) + "," + FormatTimestamp(At(kStepAt + 99)) +
          ",anomaly\n" + FormatTimestamp(At(100)) + "," + FormatTimestamp(At(101)) + ",anomaly\n");
  const std::string dir = TempPath("out");
  std::filesystem::remove_all(dir);
  const ReplayReport report =
      ReplayToDirectory(ReplayJob{.input = input, .labels = labels, .out_dir = dir}, FastOptions());
  ASSERT_TRUE(report.status.ok()) << report.status.message();

  // alerts.jsonl is exactly the alerts RunReplay hands out, one JSON line each.
  const Collected direct = Replay(input, FastOptions());
  EXPECT_EQ(ReadText(dir + "/alerts.jsonl"), direct.jsonl);

  const nlohmann::json summary = WithoutTiming(ReadText(dir + "/summary.json"));
  ASSERT_TRUE(summary.is_object());
  EXPECT_EQ(summary.at("ok"), true);
  EXPECT_EQ(summary.at("rows"), kRows);
  EXPECT_EQ(summary.at("alert_lines"), static_cast<std::int64_t>(direct.alerts.size()));
  EXPECT_EQ(summary.at("alerts").at("raise"), report.summary.alerts.raises());
  EXPECT_EQ(summary.at("channels").size(), 2u);
  EXPECT_EQ(summary.at("channels")[0].at("alerts").at("sensor").at("raise"), 1);
  EXPECT_EQ(summary.at("channels")[0].at("context"), nlohmann::json::array({"skid.temp"}));
  const nlohmann::json& scores = summary.at("scores");
  EXPECT_EQ(scores.at("windows"), 2);
  const nlohmann::json& overall = scores.at("overall");
  EXPECT_EQ(overall.at("anomaly_windows"), 2);
  EXPECT_EQ(overall.at("detected"), 1) << "the step, not the quiet window";
  const nlohmann::json& step = overall.at("windows")[0];
  EXPECT_EQ(step.at("first_channel"), "skid.flow");
  EXPECT_LE(step.at("delay_s").get<double>(), 15.0 + 10.0);  // on-delay + ten samples
  EXPECT_TRUE(overall.at("windows")[1].at("delay_s").is_null()) << "missed: NaN is null";
  EXPECT_EQ(scores.at("channels").size(), 2u);

  // The printed table carries the same facts.
  const std::string text = FormatReportText(report);
  EXPECT_NE(text.find("skid.flow"), std::string::npos) << text;
  EXPECT_NE(text.find("1 of 2 anomaly windows detected"), std::string::npos) << text;
}

TEST(ReplayRunnerTest, FailedReplayStillWritesAnHonestSummary) {
  const std::string input =
      WriteText("bad.csv", BadCsv(FormatTimestamp(At(3)) + ",50.0,abc", /*at_line=*/3));
  const std::string dir = TempPath("out");
  const ReplayReport report =
      ReplayToDirectory(ReplayJob{.input = input, .labels = {}, .out_dir = dir}, FastOptions());
  ASSERT_FALSE(report.status.ok());
  const nlohmann::json summary = WithoutTiming(ReadText(dir + "/summary.json"));
  EXPECT_EQ(summary.at("ok"), false);
  EXPECT_EQ(summary.at("error"), report.status.message());
  EXPECT_TRUE(summary.at("scores").is_null()) << "no labels, no scores";
}

TEST(ReplayRunnerTest, BadLabelsFailTheJobNamingTheLine) {
  const std::string input = WriteText("ok.csv", BadCsv(FormatTimestamp(At(3)) + ",1,2", 3));
  const std::string labels =
      WriteText("bad.labels.csv", "start,end,kind\nyesterday,today,anomaly\n");
  const ReplayReport report = ReplayToDirectory(
      ReplayJob{.input = input, .labels = labels, .out_dir = TempPath("out")}, FastOptions());
  ASSERT_FALSE(report.status.ok());
  EXPECT_EQ(report.status.message().rfind(labels + ":2:1:", 0), 0u) << report.status.message();
}

TEST(ReplayRunnerTest, ParallelJobsGiveWhatOneAtATimeGives) {
  std::vector<std::string> inputs = {
      WriteText("a.csv", SyntheticCsv(Synthetic{.rows = 450, .seed = 1, .step_at = 400})),
      WriteText("b.csv", SyntheticCsv(Synthetic{.rows = 450, .seed = 2, .nan_at = 420}))};
  const std::vector<std::string> parallel_dirs = OutputDirsFor(inputs, TempPath("parallel"));
  const std::vector<std::string> serial_dirs = OutputDirsFor(inputs, TempPath("serial"));
  std::vector<ReplayJob> parallel;
  std::vector<ReplayJob> serial;
  for (std::size_t i = 0; i < inputs.size(); ++i) {
    parallel.push_back(ReplayJob{.input = inputs[i], .labels = {}, .out_dir = parallel_dirs[i]});
    serial.push_back(ReplayJob{.input = inputs[i], .labels = {}, .out_dir = serial_dirs[i]});
  }
  std::vector<std::int64_t> last_line(inputs.size(), 0);
  const std::vector<ReplayReport> together = RunReplayJobs(
      parallel, FastOptions(), 2, [&last_line](std::size_t job, const ReplayProgress& p) {
        last_line[job] = p.line;  // each job reports only from its own thread
      });
  const std::vector<ReplayReport> one_by_one = RunReplayJobs(serial, FastOptions(), 1);
  ASSERT_EQ(together.size(), 2u);
  for (std::size_t i = 0; i < inputs.size(); ++i) {
    ASSERT_TRUE(together[i].status.ok()) << together[i].status.message();
    ASSERT_TRUE(one_by_one[i].status.ok());
    EXPECT_EQ(together[i].summary.input, inputs[i]) << "reports in job order";
    EXPECT_EQ(last_line[i], 451);
    const std::string alerts = ReadText(parallel_dirs[i] + "/alerts.jsonl");
    EXPECT_FALSE(alerts.empty());
    EXPECT_EQ(alerts, ReadText(serial_dirs[i] + "/alerts.jsonl"));
    EXPECT_EQ(WithoutTiming(ReadText(parallel_dirs[i] + "/summary.json")),
              WithoutTiming(ReadText(serial_dirs[i] + "/summary.json")));
  }
  EXPECT_NE(ReadText(parallel_dirs[0] + "/alerts.jsonl"),
            ReadText(parallel_dirs[1] + "/alerts.jsonl"));
}

TEST(ReplayRunnerTest, OutputFoldersAreNamedAfterTheRecordings) {
  EXPECT_EQ(RecordingStem("data/cw2_day.csv.gz"), "cw2_day");
  EXPECT_EQ(RecordingStem("cw2_day.csv"), "cw2_day");
  EXPECT_EQ(RecordingStem("/x/day.gz"), "day");
  EXPECT_EQ(RecordingStem("/x/.."), "recording");
  EXPECT_EQ(RecordingStem("dir/"), "recording");
  const std::vector<std::string> one = {"a/day.csv"};
  EXPECT_EQ(OutputDirsFor(one, "out"), std::vector<std::string>{"out"});
  const std::vector<std::string> several = {"a/day.csv", "b/day.csv.gz", "day-2.csv", "night.csv"};
  const std::vector<std::string> expected = {"out/day", "out/day-2", "out/day-2-2", "out/night"};
  EXPECT_EQ(OutputDirsFor(several, "out"), expected);
}

// ---- alarm rate, floods and labels: the guidance of ../shared/references/references.md §7.

std::vector<core::TimestampUs> Every(core::TimestampUs first, core::TimestampUs step, int count) {
  std::vector<core::TimestampUs> times;
  times.reserve(static_cast<std::size_t>(count));
  for (int i = 0; i < count; ++i) times.push_back(first + i * step);
  return times;
}

TEST(AlarmRateTest, RatesAgainstSixAndTwelvePerHour) {
  // ~6/h "very likely acceptable", ~12/h "maximum manageable" (ANSI/ISA-18.2 Table 5, from
  // memory, references.md §7.2; EEMUA 191 KPI 1 per 10 minutes, §7.1).
  const core::TimestampUs hour = 3600 * kUs;
  AlarmRate rate = ComputeAlarmRate(Every(kDay, 300 * kUs, 12), kDay, 2 * hour);
  EXPECT_DOUBLE_EQ(rate.hours, 2.0);
  EXPECT_DOUBLE_EQ(rate.per_hour, 6.0);
  EXPECT_EQ(rate.rating, AlarmRateRating::kAcceptable);
  rate = ComputeAlarmRate(Every(kDay, 300 * kUs, 13), kDay, 2 * hour);
  EXPECT_EQ(rate.rating, AlarmRateRating::kManageable);
  rate = ComputeAlarmRate(Every(kDay, 150 * kUs, 24), kDay, 2 * hour);
  EXPECT_DOUBLE_EQ(rate.per_hour, 12.0);
  EXPECT_EQ(rate.rating, AlarmRateRating::kManageable);
  rate = ComputeAlarmRate(Every(kDay, 150 * kUs, 25), kDay, 2 * hour);
  EXPECT_EQ(rate.rating, AlarmRateRating::kOverload);
  EXPECT_EQ(rate.periods, 12);
  rate = ComputeAlarmRate({}, kDay, 0);
  EXPECT_EQ(rate.rating, AlarmRateRating::kUnknown);
  EXPECT_EQ(rate.periods, 0);
}

TEST(AlarmRateTest, FloodIsMoreThanTenInTenMinutes) {
  // "More than 10 alarms in 10 minutes" (ISA-18.2 definition as quoted, references.md §7.1).
  const core::TimestampUs start = kDay + 3600 * kUs;
  // Ten raises 59 s apart fill 531 s: the worst window, but not a flood.
  std::vector<core::TimestampUs> ten = Every(start, 59 * kUs, 10);
  AlarmRate rate = ComputeAlarmRate(ten, kDay, 86400 * kUs);
  EXPECT_EQ(rate.worst_window_raises, 10);
  EXPECT_EQ(rate.worst_window_start, start);
  EXPECT_FALSE(rate.flood);
  // An eleventh at 599 s is inside the window that starts with the first: a flood.
  std::vector<core::TimestampUs> eleven = ten;
  eleven.push_back(start + 599 * kUs);
  rate = ComputeAlarmRate(eleven, kDay, 86400 * kUs);
  EXPECT_EQ(rate.worst_window_raises, 11);
  EXPECT_TRUE(rate.flood);
  // At exactly 600 s it falls in the next window ([start, start + 10 min) is half-open).
  eleven.back() = start + 600 * kUs;
  rate = ComputeAlarmRate(eleven, kDay, 86400 * kUs);
  EXPECT_EQ(rate.worst_window_raises, 10);
  EXPECT_FALSE(rate.flood);
  EXPECT_EQ(rate.worst_window_start, start);
  // A day is 144 ten-minute periods.
  EXPECT_EQ(rate.periods, 144);
}

TEST(AlarmRateTest, CountsFixedPeriodsInFlood) {
  // Twelve raises in each of periods 2 and 5 (0-based), a few elsewhere.
  std::vector<core::TimestampUs> times;
  for (const int period : {2, 5}) {
    for (const core::TimestampUs t : Every(kDay + period * kFloodWindowUs + kUs, 40 * kUs, 12)) {
      times.push_back(t);
    }
  }
  times.push_back(kDay + 7 * kFloodWindowUs);
  std::sort(times.begin(), times.end());
  const AlarmRate rate = ComputeAlarmRate(times, kDay, 10 * kFloodWindowUs - kUs);
  EXPECT_EQ(rate.periods, 10);
  EXPECT_EQ(rate.flood_periods, 2);
  EXPECT_EQ(rate.worst_window_raises, 12);
  EXPECT_TRUE(rate.flood);
}

TEST(AlarmRateTest, EventNoticesAreNotAlarms) {
  // An event alert says an expected pattern was seen: a notice, not an annunciated alarm.
  ReplaySummary summary;
  summary.first_time = kDay;
  summary.last_time = kDay + 3600 * kUs;
  summary.raises = {{kDay + kUs, 0, core::AlertKind::kAnomaly, core::Detector::kCusum},
                    {kDay + 2 * kUs, 0, core::AlertKind::kEvent, core::Detector::kTemplate},
                    {kDay + 3 * kUs, 0, core::AlertKind::kSensor, core::Detector::kGap}};
  const AlarmRate rate = ComputeAlarmRate(summary);
  EXPECT_EQ(rate.raises, 2);
  EXPECT_DOUBLE_EQ(rate.per_hour, 2.0);
  EXPECT_EQ(rate.worst_window_raises, 2);
}

TEST(LabelScoresTest, ScoresAnomalyAlarmsAndReportsSensorAlarmsApart) {
  // The rule itself is event_scoring's (tested there, replay_data/FORMAT.md "Scoring");
  // here: which raises reach it, the duration it is given, and the per-channel rows.
  ReplaySummary summary;
  summary.channels = {ChannelSummary{.name = "a", .sample_period_s = 1.0},
                      ChannelSummary{.name = "b", .sample_period_s = 2.0}};
  summary.first_time = kDay;
  summary.last_time = kDay + 86399 * kUs;
  const auto raise = [](int s, std::uint32_t channel, core::AlertKind kind) {
    return RaiseRecord{kDay + s * kUs, channel, kind, core::Detector::kCusum};
  };
  summary.raises = {raise(50, 0, core::AlertKind::kAnomaly),
                    raise(120, 1, core::AlertKind::kSensor),
                    raise(130, 0, core::AlertKind::kEvent),  // a notice: not scored
                    raise(5000, 1, core::AlertKind::kAnomaly)};
  const std::vector<LabelWindow> windows = {
      {kDay + 100 * kUs, kDay + 150 * kUs, "anomaly"},
      {kDay + 9000 * kUs, kDay + 9100 * kUs, "anomaly"},
      {kDay + 40 * kUs, kDay + 60 * kUs, "event"},
  };
  const LabelScores scores = ScoreAgainstLabels(summary, windows, "x.labels.csv");
  EXPECT_DOUBLE_EQ(scores.duration_s, 86400.0) << "span plus the shortest sample period";
  EXPECT_EQ(scores.windows, 3);
  // Detection scores count the anomaly alarms only: 50 (during the event) and 5000.
  const EventScores& all = scores.table.overall;
  EXPECT_EQ(all.raises, 2);
  EXPECT_EQ(all.true_raises, 0);
  EXPECT_EQ(all.expected_raises, 1);  // 50 during the event
  EXPECT_EQ(all.false_alarms, 1);     // 5000
  EXPECT_EQ(all.detected, 0) << "the sensor alarm at 120 is not a detection";
  ASSERT_EQ(all.outcomes.size(), 2u);
  EXPECT_DOUBLE_EQ(all.false_alarms_per_day, 1.0);
  ASSERT_EQ(scores.table.channels.size(), 2u);
  EXPECT_EQ(scores.table.channels[0].channel, "a");
  EXPECT_EQ(scores.table.channels[0].scores.detected, 0);
  EXPECT_EQ(scores.table.channels[1].scores.detected, 0);
  // The sensor alarm is reported apart, by the same rule: in the first window, after 20 s.
  const EventScores& sensor = scores.sensor_alarms;
  EXPECT_EQ(sensor.raises, 1);
  EXPECT_EQ(sensor.true_raises, 1);
  EXPECT_EQ(sensor.detected, 1);
  ASSERT_EQ(sensor.outcomes.size(), 2u);
  EXPECT_EQ(sensor.outcomes[0].first_channel, "b");
  EXPECT_DOUBLE_EQ(sensor.outcomes[0].delay_s, 20.0);
  ASSERT_EQ(scores.detectors.size(), 1u);
  EXPECT_FALSE(scores.detectors[0].points.has_value()) << "point-wise needs the replay's rows";
}

TEST(ReportJsonTest, IsValidJsonWithEveryCount) {
  ReplayReport report;
  report.summary.input = "q\"uote.csv";
  report.summary.channels = {ChannelSummary{.name = "m³"}};
  core::Alert alert;
  alert.kind = core::AlertKind::kSensor;
  alert.detector = core::Detector::kGap;
  report.summary.alerts.Add(alert);
  report.summary.channels[0].alerts.Add(alert);
  report.alarm_rate = ComputeAlarmRate(report.summary);
  const nlohmann::json j = nlohmann::json::parse(ReportToJson(report), nullptr, false);
  ASSERT_FALSE(j.is_discarded()) << ReportToJson(report);
  EXPECT_EQ(j.at("input"), "q\"uote.csv");
  EXPECT_TRUE(j.at("start").is_null()) << "no rows";
  EXPECT_EQ(j.at("alerts").at("sensor").at("raise"), 1);
  EXPECT_EQ(j.at("alerts").at("raises_by_detector").at("gap"), 1);
  EXPECT_EQ(j.at("channels")[0].at("name"), "m³");
  EXPECT_EQ(j.at("alarm_rate").at("rating"), "unknown");
  EXPECT_TRUE(j.at("alarm_rate").at("worst_window").is_null());
  EXPECT_TRUE(j.contains("timing"));
}

}  // namespace
}  // namespace nightjar::replay
