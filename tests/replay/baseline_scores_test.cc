// The four score rows of a labelled replay: nightjar, "next = last", static limits and
// the windowed gaussian, each computed by the one scoring rule (event_scoring.h and
// pointwise_scoring.h, replay_data/FORMAT.md "Scoring"), checked against the same
// detectors run independently here.
//
// The recording is invented for the test (1 Hz, one channel): a triangle wave of
// amplitude 10 and period 300 s plus noise (sd 0.2). Over its warm-up the static
// baseline learns sigma ~ 10 / sqrt(3) (the standard deviation of a triangle wave of
// amplitude A is A / sqrt(3), a textbook fact, from memory), so its limits sit near
// mean +- 17. A slow drift to +6 keeps every value inside them (10 + 6 + noise < 17):
// the static limits must miss it. A +30 step is far outside: they must catch it. The
// windowed gaussian (100 samples) sees sigma ~ 3.9 on a third of a triangle period (a
// ramp of range R has sd R / sqrt(12), from memory) and must catch the step too.
#include "replay/baseline_scores.h"

#include <gtest/gtest.h>

#include <array>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <iterator>
#include <memory>
#include <nlohmann/json.hpp>
#include <random>
#include <string>
#include <vector>

#include "replay/recording_reader.h"
#include "replay/replay_runner.h"
#include "replay/replay_summary.h"
#include "replay/static_limits_baseline.h"
#include "replay/timestamp.h"
#include "replay/windowed_gaussian_baseline.h"

namespace nightjar::replay {
namespace {

constexpr core::TimestampUs kUs = core::kMicrosPerSecond;
constexpr core::TimestampUs kDay = 1773014400 * kUs;  // 2026-03-09T00:00:00Z
constexpr int kRows = 3000;
constexpr int kDriftFrom = 1500;
constexpr int kDriftTo = 2400;
constexpr int kStepFrom = 2700;
constexpr int kStepTo = 2760;

core::TimestampUs At(int row) { return kDay + row * kUs; }

std::string TempPath(const std::string& name) {
  const ::testing::TestInfo* info = ::testing::UnitTest::GetInstance()->current_test_info();
  return ::testing::TempDir() + "nightjar_baselines_" + info->name() + "_" + name;
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

double Triangle(int i) {
  const double phase = static_cast<double>(i % 300) / 300.0;  // 0..1
  return 10.0 * (phase < 0.5 ? 4.0 * phase - 1.0 : 3.0 - 4.0 * phase);
}

std::string DriftCsv() {
  std::mt19937_64 rng(11);
  std::normal_distribution<double> noise(0.0, 0.2);
  std::string csv = "timestamp,skid.level\n";
  for (int i = 0; i < kRows; ++i) {
    double value = 50.0 + Triangle(i) + noise(rng);
    if (i >= kDriftFrom && i < kDriftTo) {
      value += 6.0 * static_cast<double>(i - kDriftFrom) / (kDriftTo - kDriftFrom);
    }
    if (i >= kStepFrom && i < kStepTo) value += 30.0;
    std::array<char, 64> cell{};
    std::snprintf(cell.data(), cell.size(), "%.3f", value);
    csv += FormatTimestamp(At(i)) + "," + cell.data() + "\n";
  }
  return csv;
}

std::string DriftLabels() {
  return "start,end,kind\n" + FormatTimestamp(At(kDriftFrom)) + "," +
         FormatTimestamp(At(kDriftTo - 1)) + ",anomaly\n" + FormatTimestamp(At(kStepFrom)) + "," +
         FormatTimestamp(At(kStepTo - 1)) + ",anomaly\n";
}

std::vector<LabelWindow> Windows() {
  return {{At(kDriftFrom), At(kDriftTo - 1), "anomaly"},
          {At(kStepFrom), At(kStepTo - 1), "anomaly"}};
}

// Short warm-up and a small model, as in replay_runner_test.cc.
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

void ExpectSameScores(const EventScores& got, const EventScores& want, const std::string& row) {
  SCOPED_TRACE(row);
  EXPECT_EQ(got.windows, want.windows);
  EXPECT_EQ(got.detected, want.detected);
  EXPECT_EQ(got.raises, want.raises);
  EXPECT_EQ(got.true_raises, want.true_raises);
  EXPECT_EQ(got.false_alarms, want.false_alarms);
  EXPECT_DOUBLE_EQ(got.f1, want.f1);
}

TEST(BaselineScoresTest, StaticLimitsMissTheDriftInsideThemAndCatchTheStep) {
  const std::string input = WriteText("drift.csv", DriftCsv());
  const std::vector<std::string> names = {"skid.level"};
  const BaselineOutcome outcome =
      ScoreBaselines(input, FastOptions(), Windows(), names, static_cast<double>(kRows));
  ASSERT_TRUE(outcome.status.ok()) << outcome.status.message();
  ASSERT_EQ(outcome.rows.size(), 3u);
  EXPECT_EQ(outcome.rows[2].detector, "windowed gaussian");
  EXPECT_EQ(outcome.rows[0].detector, "next = last");
  EXPECT_EQ(outcome.rows[1].detector,
            "static \xC2\xB1"
            "3\xCF\x83");

  const EventScores& limits = outcome.rows[1].table.overall;
  EXPECT_EQ(limits.windows, 2);
  EXPECT_EQ(limits.detected, 1) << "the step only";
  ASSERT_EQ(limits.outcomes.size(), 2u);
  EXPECT_FALSE(limits.outcomes[0].detected) << "the drift never leaves mean +- 3 sigma";
  EXPECT_TRUE(limits.outcomes[1].detected);
  EXPECT_EQ(limits.false_alarms, 0);

  // The same baseline run by hand over the same values, scored by the same rule.
  StaticLimitsBaseline by_hand(FastOptions().engine.defaults);
  std::vector<BaselineEdge> edges;
  core::Result<std::unique_ptr<RecordingReader>> reader = RecordingReader::Open(input);
  ASSERT_TRUE(reader.ok());
  RecordingRow row;
  while ((*reader)->Next(&row).value()) {
    by_hand.Process("skid.level", row.time, *row.values[0], edges);
  }
  const StaticLimits learnt = *by_hand.limits("skid.level");
  EXPECT_NEAR(learnt.sigma, 10.0 / std::sqrt(3.0), 0.3) << "triangle wave sd A/sqrt(3)";
  ExpectSameScores(
      limits,
      ScoreEventsByChannel(RaisesOf(edges), Windows(), names, static_cast<double>(kRows)).overall,
      "static");

  // The windowed gaussian by hand over the same values: same raises, and it finds the step.
  WindowedGaussianBaseline gaussian_by_hand(FastOptions().engine.defaults);
  std::vector<BaselineEdge> gaussian_edges;
  core::Result<std::unique_ptr<RecordingReader>> again = RecordingReader::Open(input);
  ASSERT_TRUE(again.ok());
  while ((*again)->Next(&row).value()) {
    gaussian_by_hand.Process("skid.level", row.time, *row.values[0], gaussian_edges);
  }
  const EventScores& gaussian = outcome.rows[2].table.overall;
  ExpectSameScores(
      gaussian,
      ScoreEventsByChannel(RaisesOf(gaussian_edges), Windows(), names, static_cast<double>(kRows))
          .overall,
      "windowed gaussian");
  ASSERT_EQ(gaussian.outcomes.size(), 2u);
  EXPECT_TRUE(gaussian.outcomes[1].detected) << "the +30 step leaves any 3 sigma band";
  EXPECT_DOUBLE_EQ(gaussian.outcomes[1].delay_s, 0.0) << "on its first sample";

  // Every row has point-wise counts over the same points: one per row of the recording,
  // positive inside the two windows (900 + 60 rows).
  for (const DetectorScores& scored : outcome.rows) {
    SCOPED_TRACE(scored.detector);
    ASSERT_TRUE(scored.points.has_value());
    EXPECT_EQ(scored.points->samples, kRows);
    EXPECT_EQ(scored.points->positives, (kDriftTo - kDriftFrom) + (kStepTo - kStepFrom));
  }
  EXPECT_GE(outcome.rows[2].points->true_positives, 1) << "flagged at the step";

  // "next = last": the engine with only the forecaster changed, scored by the same rule.
  ReplayOptions last_value = FastOptions();
  last_value.engine.defaults.forecaster = core::Forecaster::kLastValue;
  std::vector<Raise> raises;
  ReplayCallbacks callbacks;
  callbacks.on_alert = [&raises](const core::Alert& alert) {
    if (alert.phase == core::AlertPhase::kRaise && alert.kind != core::AlertKind::kEvent) {
      raises.push_back({alert.time, alert.channel});
    }
    return core::Status::Ok();
  };
  ASSERT_TRUE(RunReplay(input, last_value, callbacks).status.ok());
  ExpectSameScores(
      outcome.rows[0].table.overall,
      ScoreEventsByChannel(raises, Windows(), names, static_cast<double>(kRows)).overall,
      "next = last");
}

TEST(BaselineScoresTest, DirectoryOutputHasThreeRowsInJsonTextAndPage) {
  const std::string input = WriteText("drift.csv", DriftCsv());
  const std::string labels = WriteText("drift.labels.csv", DriftLabels());
  const std::string dir = TempPath("out");
  std::filesystem::remove_all(dir);
  const ReplayReport report =
      ReplayToDirectory(ReplayJob{.input = input, .labels = labels, .out_dir = dir}, FastOptions());
  ASSERT_TRUE(report.status.ok()) << report.status.message();
  ASSERT_TRUE(report.scores.has_value());
  const std::vector<DetectorScores>& rows = report.scores->detectors;
  ASSERT_EQ(rows.size(), 4u);
  EXPECT_EQ(rows[3].detector, "windowed gaussian");
  EXPECT_EQ(rows[0].detector, "nightjar");
  EXPECT_EQ(rows[1].detector, "next = last");
  EXPECT_EQ(rows[2].detector,
            "static \xC2\xB1"
            "3\xCF\x83");
  ExpectSameScores(rows[0].table.overall, report.scores->table.overall, "nightjar row");
  EXPECT_FALSE(rows[2].table.overall.outcomes.at(0).detected) << "static misses the drift";

  const nlohmann::json summary = nlohmann::json::parse(ReadText(dir + "/summary.json"));
  const nlohmann::json& detectors = summary.at("scores").at("detectors");
  ASSERT_EQ(detectors.size(), 4u);
  for (std::size_t i = 0; i < rows.size(); ++i) {
    ASSERT_TRUE(rows[i].points.has_value()) << rows[i].detector;
    EXPECT_EQ(detectors[i].at("points").at("points"), kRows);
    EXPECT_EQ(detectors[i].at("points").at("flagged"), rows[i].points->flagged);
    EXPECT_EQ(detectors[i].at("points").at("true_positives"), rows[i].points->true_positives);
    EXPECT_DOUBLE_EQ(detectors[i].at("points").at("f1").get<double>(), rows[i].points->f1());
    EXPECT_EQ(detectors[i].at("detector"), rows[i].detector);
    EXPECT_EQ(detectors[i].at("overall").at("detected"), rows[i].table.overall.detected);
    EXPECT_EQ(detectors[i].at("overall").at("false_alarms"), rows[i].table.overall.false_alarms);
  }

  const std::string text = FormatReportText(report);
  for (const DetectorScores& row : rows) {
    EXPECT_NE(text.find("  " + row.detector + " "), std::string::npos) << text;
  }

  const std::string page = ReadText(dir + "/report.html");
  EXPECT_NE(page.find("skid.level"), std::string::npos);
  for (const DetectorScores& row : rows) {
    EXPECT_NE(page.find(row.detector), std::string::npos) << row.detector;
  }
}

TEST(BaselineScoresTest, NoLabelsNoRowsButStillAPage) {
  const std::string input = WriteText("drift.csv", DriftCsv());
  const std::string dir = TempPath("out");
  std::filesystem::remove_all(dir);
  const ReplayReport report =
      ReplayToDirectory(ReplayJob{.input = input, .labels = {}, .out_dir = dir}, FastOptions());
  ASSERT_TRUE(report.status.ok()) << report.status.message();
  EXPECT_FALSE(report.scores.has_value());
  EXPECT_TRUE(std::filesystem::is_regular_file(dir + "/report.html"));
}

}  // namespace
}  // namespace nightjar::replay
