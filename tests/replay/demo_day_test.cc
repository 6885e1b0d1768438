// Checks the committed demo recording replay_data/cw2_day.csv.gz (made by
// scripts/simulate-plant) against what replay_data/FORMAT.md promises about it.
#include <gtest/gtest.h>

#include <cstdint>
#include <string>
#include <vector>

#include "replay/labels.h"
#include "replay/recording_reader.h"
#include "replay/timestamp.h"

namespace nightjar::replay {
namespace {

constexpr core::TimestampUs kUs = core::kMicrosPerSecond;
std::string RecordingPath() {
  return std::string(NIGHTJAR_SOURCE_DIR) + "/replay_data/cw2_day.csv.gz";
}

core::TimestampUs DayStart() { return *ParseTimestamp("2026-03-09T00:00:00Z"); }

bool InWindowOfKind(const std::vector<LabelWindow>& windows, core::TimestampUs t,
                    const std::string& kind) {
  for (const LabelWindow& window : windows) {
    if (window.kind == kind && window.Contains(t)) return true;
  }
  return false;
}

TEST(DemoDayTest, LabelsLieInsideTheDay) {
  core::Result<std::vector<LabelWindow>> labels = ReadLabels(LabelsPathFor(RecordingPath()));
  ASSERT_TRUE(labels.ok()) << labels.status().message();
  ASSERT_EQ(labels->size(), 7u);
  int anomalies = 0;
  int events = 0;
  for (const LabelWindow& window : *labels) {
    EXPECT_GE(window.start, DayStart()) << FormatTimestamp(window.start);
    EXPECT_LE(window.end, DayStart() + 86399 * kUs) << FormatTimestamp(window.end);
    EXPECT_LE(window.start, window.end);
    anomalies += window.kind == "anomaly" ? 1 : 0;
    events += window.kind == "event" ? 1 : 0;
  }
  EXPECT_EQ(anomalies, 5);
  EXPECT_EQ(events, 2);
}

TEST(DemoDayTest, OneDayAtOneSecondWithTheDropoutAsEmptyCells) {
  core::Result<std::vector<LabelWindow>> labels = ReadLabels(LabelsPathFor(RecordingPath()));
  ASSERT_TRUE(labels.ok()) << labels.status().message();
  core::Result<std::unique_ptr<RecordingReader>> reader = RecordingReader::Open(RecordingPath());
  ASSERT_TRUE(reader.ok()) << reader.status().message();
  const std::vector<std::string> expected = {"cw2.pump_a.flow", "cw2.pump_a.discharge_pressure",
                                             "cw2.pump_a.motor_current", "cw2.pump_a.bearing_temp",
                                             "cw2.tank.level"};
  ASSERT_EQ((*reader)->channels(), expected);
  constexpr std::size_t kFlow = 0;
  constexpr std::size_t kLevel = 4;

  RecordingRow row;
  std::int64_t rows = 0;
  std::int64_t empty_level = 0;
  std::int64_t other_empty = 0;
  std::int64_t empty_outside_anomaly = 0;
  // Runs of one exact running-flow value: a frozen transmitter.
  double run_value = -1;
  std::int64_t run_length = 0;
  core::TimestampUs run_start = 0;
  std::int64_t longest_run = 0;
  bool longest_run_labelled = false;
  for (;;) {
    core::Result<bool> got = (*reader)->Next(&row);
    ASSERT_TRUE(got.ok()) << got.status().message();
    if (!*got) break;
    ASSERT_EQ(row.time, DayStart() + rows * kUs) << "line " << row.line;
    ++rows;
    for (std::size_t i = 0; i < row.values.size(); ++i) {
      if (row.values[i].has_value()) continue;
      if (i == kLevel) {
        ++empty_level;
        if (!InWindowOfKind(*labels, row.time, "anomaly")) ++empty_outside_anomaly;
      } else {
        ++other_empty;
      }
    }
    const double flow = row.values[kFlow].value_or(-1);
    if (flow > 0 && flow == run_value) {
      ++run_length;
    } else {
      run_value = flow;
      run_length = 1;
      run_start = row.time;
    }
    if (run_length > longest_run) {
      longest_run = run_length;
      // The frozen value is the last good one, so the run starts one second early.
      longest_run_labelled = InWindowOfKind(*labels, run_start + kUs, "anomaly") &&
                             InWindowOfKind(*labels, row.time, "anomaly");
    }
  }
  EXPECT_EQ(rows, 86400);
  EXPECT_EQ((*reader)->skipped_rows(), 0);
  EXPECT_EQ((*reader)->repeated_timestamps(), 0);
  EXPECT_EQ(empty_level, 600);  // the 10-minute level dropout
  EXPECT_EQ(empty_outside_anomaly, 0);
  EXPECT_EQ(other_empty, 0);
  EXPECT_EQ(longest_run, 1201);  // 20 minutes frozen, plus the last good sample
  EXPECT_TRUE(longest_run_labelled);
}

}  // namespace
}  // namespace nightjar::replay
