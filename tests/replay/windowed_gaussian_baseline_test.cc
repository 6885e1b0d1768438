// Windowed gaussian baseline: trailing-window mean +- k sigma.
//
// Outside source: numpy (Debian python3-numpy). tests/replay/make_windowed_gaussian_reference.py
// computes, for a seeded series, each sample's window mean, sample standard deviation
// (ddof=1) and ratio with numpy and the alarm's raise/clear hysteresis, and wrote
// tests/replay/data/windowed_gaussian_reference.csv; this test feeds the same values to
// the C++ baseline and compares sample by sample. The small cases below are worked by
// hand in the comments.
#include "replay/windowed_gaussian_baseline.h"

#include <gtest/gtest.h>

#include <cmath>
#include <cstdlib>
#include <fstream>
#include <limits>
#include <optional>
#include <sstream>
#include <string>
#include <vector>

namespace nightjar::replay {
namespace {

constexpr core::TimestampUs kUs = core::kMicrosPerSecond;
constexpr core::TimestampUs kDay = 1773014400 * kUs;  // 2026-03-09T00:00:00Z

core::TimestampUs At(int second) { return kDay + second * kUs; }

struct ReferenceRow {
  double value = 0.0;
  std::optional<double> mean, sd, ratio;  // empty while the window fills
  bool active = false;
};

std::optional<double> Cell(const std::string& cell) {
  if (cell.empty()) return std::nullopt;
  return std::strtod(cell.c_str(), nullptr);
}

std::vector<ReferenceRow> ReadReference() {
  const std::string path =
      std::string(NIGHTJAR_SOURCE_DIR) + "/tests/replay/data/windowed_gaussian_reference.csv";
  std::ifstream in(path);
  EXPECT_TRUE(in.good()) << path;
  std::vector<ReferenceRow> rows;
  std::string line;
  while (std::getline(in, line)) {
    if (line.empty() || line[0] == '#' || line.starts_with("index")) continue;
    std::vector<std::string> cells;
    std::stringstream split(line);
    std::string cell;
    while (std::getline(split, cell, ',')) cells.push_back(cell);
    if (cells.size() == 5) cells.emplace_back();  // getline drops a last empty cell
    EXPECT_EQ(cells.size(), 6u) << line;
    if (cells.size() != 6) continue;
    rows.push_back({std::strtod(cells[1].c_str(), nullptr), Cell(cells[2]), Cell(cells[3]),
                    Cell(cells[4]), cells[5] == "1"});
  }
  return rows;
}

// The reference's alarm: no delays, deadband 0.1 (make_windowed_gaussian_reference.py).
constexpr core::AlarmTiming kReferenceTiming{
    .on_delay_s = 0, .off_delay_s = 0, .deadband = 0.1, .chatter_raises = 0};

TEST(WindowedGaussianBaselineTest, MatchesNumpySampleBySample) {
  const std::vector<ReferenceRow> rows = ReadReference();
  ASSERT_EQ(rows.size(), 400u);
  WindowedGaussianBaseline baseline(20, 3.0, kReferenceTiming);
  std::vector<BaselineEdge> edges;
  int judged = 0;
  int flagged = 0;
  for (std::size_t i = 0; i < rows.size(); ++i) {
    const std::optional<double> ratio =
        baseline.Process("x", At(static_cast<int>(i)), rows[i].value, edges);
    ASSERT_EQ(ratio.has_value(), rows[i].ratio.has_value()) << "sample " << i;
    if (ratio) {
      ++judged;
      EXPECT_NEAR(*ratio, *rows[i].ratio, 1e-9 * std::max(1.0, *rows[i].ratio)) << "sample " << i;
    }
    EXPECT_EQ(baseline.active("x"), rows[i].active) << "sample " << i;
    flagged += rows[i].active ? 1 : 0;
  }
  EXPECT_EQ(judged, 380) << "the first 20 samples only fill the window";
  EXPECT_GT(flagged, 0) << "the reference series must exercise the alarm";
  // Raises and clears alternate, the first raise at the step (sample 150).
  ASSERT_FALSE(edges.empty());
  EXPECT_EQ(edges.front().phase, core::AlertPhase::kRaise);
  EXPECT_EQ(edges.front().time, At(150));
  for (std::size_t i = 1; i < edges.size(); ++i) EXPECT_NE(edges[i].phase, edges[i - 1].phase);
}

TEST(WindowedGaussianBaselineTest, JudgesAgainstThePreviousWindowOnly) {
  // Window 4, k 1, values 1 2 3 4 then 6: window {1,2,3,4}, mean 2.5, squared deviations
  // 2.25 + 0.25 + 0.25 + 2.25 = 5, s = sqrt(5 / 3) = 1.29099; |6 - 2.5| / s = 2.71109.
  // Next 2: window {2,3,4,6}, mean 3.75, deviations 3.0625 + 0.5625 + 0.0625 + 5.0625 =
  // 8.75, s = sqrt(8.75 / 3) = 1.70783; |2 - 3.75| / s = 1.02470.
  WindowedGaussianBaseline baseline(4, 1.0, kReferenceTiming);
  std::vector<BaselineEdge> edges;
  for (int i = 0; i < 4; ++i) {
    EXPECT_FALSE(baseline.Process("x", At(i), i + 1.0, edges).has_value());
  }
  EXPECT_NEAR(*baseline.Process("x", At(4), 6.0, edges), 2.71109, 1e-5);
  ASSERT_EQ(edges.size(), 1u);
  EXPECT_EQ(edges[0].phase, core::AlertPhase::kRaise);
  EXPECT_NEAR(*baseline.Process("x", At(5), 2.0, edges), 1.02470, 1e-5);
  EXPECT_EQ(edges.size(), 1u) << "still outside: no clear";
}

TEST(WindowedGaussianBaselineTest, ConstantWindowAndUnusableSamples) {
  WindowedGaussianBaseline baseline(3, 3.0, kReferenceTiming);
  std::vector<BaselineEdge> edges;
  for (int i = 0; i < 3; ++i) baseline.Process("x", At(i), 5.0, edges);
  EXPECT_EQ(*baseline.Process("x", At(3), 5.0, edges), 0.0) << "the same value: inside";
  EXPECT_TRUE(std::isinf(*baseline.Process("x", At(4), 5.5, edges))) << "zero-width band";
  EXPECT_TRUE(baseline.active("x"));
  // Not finite, repeated time, earlier time: counted and ignored, never judged.
  EXPECT_FALSE(baseline.Process("x", At(5), std::numeric_limits<double>::quiet_NaN(), edges));
  EXPECT_FALSE(baseline.Process("x", At(4), 5.0, edges));
  EXPECT_FALSE(baseline.Process("x", At(2), 5.0, edges));
  EXPECT_EQ(baseline.skipped_samples(), 3);
  // Channels are independent: a new one starts filling its own window.
  EXPECT_FALSE(baseline.Process("y", At(6), 100.0, edges));
  EXPECT_FALSE(baseline.active("y"));
}

TEST(WindowedGaussianBaselineTest, ValidateNamesTheBadArgument) {
  EXPECT_TRUE(WindowedGaussianBaseline::Validate(100, 3.0, {}).ok());
  EXPECT_NE(WindowedGaussianBaseline::Validate(1, 3.0, {}).message().find("window"),
            std::string::npos);
  EXPECT_NE(WindowedGaussianBaseline::Validate(10, 0.0, {}).message().find("k:"),
            std::string::npos);
  core::AlarmTiming bad;
  bad.deadband = 1.5;
  EXPECT_FALSE(WindowedGaussianBaseline::Validate(10, 3.0, bad).ok());
  const WindowedGaussianBaseline defaults{core::ChannelOptions{}};
  EXPECT_EQ(defaults.window(), 100);
  EXPECT_EQ(defaults.k(), 3.0);
  EXPECT_EQ(defaults.name(), "windowed gaussian");
}

}  // namespace
}  // namespace nightjar::replay
