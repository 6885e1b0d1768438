// Point-wise scoring of a series (pointwise_scoring.h, replay_data/FORMAT.md "Point-wise
// scores of a series"). Hand-worked example: every count below is worked out by hand in
// the comments, from the rule as written in FORMAT.md; precision, recall and F1 are the
// textbook definitions (common practice).
#include "replay/pointwise_scoring.h"

#include <gtest/gtest.h>

#include <vector>

namespace nightjar::replay {
namespace {

constexpr core::TimestampUs kUs = core::kMicrosPerSecond;
constexpr core::TimestampUs kDay = 1773014400 * kUs;  // 2026-03-09T00:00:00Z

core::TimestampUs At(int second) { return kDay + second * kUs; }

TEST(SeriesPointScorerTest, HandWorkedSeries) {
  // Rows at 0..9 s. Anomaly window [3, 5]; event window [8, 8] with 1 s grace, so 8 and
  // 9 are excluded. Alarms: a raised at 2, b raised at 3, a cleared at 4, b cleared at 6;
  // a raised again at 9 (an excluded point). Row 5 comes twice (a repeated time): one
  // point.
  //   row:      0 1 2 3 4 5 6 7 | 8 9
  //   flagged:  - - x x x x - - | excluded
  //   positive: - - - x x x - - |
  // Judged 8, excluded 2, positives 3, flagged 4, true positives 3:
  // precision 3/4, recall 3/3, F1 = 2 * 0.75 * 1 / 1.75 = 6/7.
  const std::vector<LabelWindow> windows = {{At(3), At(5), "anomaly"}, {At(8), At(8), "event"}};
  SeriesPointScorer scorer(windows, ScoringOptions{.grace_s = 1.0});
  for (int t = 0; t < 10; ++t) {
    scorer.Row(At(t));
    if (t == 5) scorer.Row(At(5));
    if (t == 2) scorer.Edge("a", core::AlertPhase::kRaise);
    if (t == 3) scorer.Edge("b", core::AlertPhase::kRaise);
    if (t == 4) scorer.Edge("a", core::AlertPhase::kClear);
    if (t == 6) scorer.Edge("b", core::AlertPhase::kClear);
    if (t == 9) scorer.Edge("a", core::AlertPhase::kRaise);
  }
  scorer.Finish();
  const PointScores& s = scorer.scores();
  EXPECT_EQ(s.samples, 10);
  EXPECT_EQ(s.excluded, 2);
  EXPECT_EQ(s.positives, 3);
  EXPECT_EQ(s.flagged, 4);
  EXPECT_EQ(s.true_positives, 3);
  EXPECT_DOUBLE_EQ(s.precision(), 0.75);
  EXPECT_DOUBLE_EQ(s.recall(), 1.0);
  EXPECT_DOUBLE_EQ(s.f1(), 6.0 / 7.0);
}

TEST(SeriesPointScorerTest, AnyChannelFlagsTheInstantOnce) {
  // Two channels in alarm at the same rows count each row once, not twice: rows 0..3,
  // both raised at 1 and cleared at 3; no windows. Flagged rows 1 and 2: 2 of 4 points,
  // all false: precision 0 / 2 = 0, recall 1 (no positives), F1 0.
  SeriesPointScorer scorer({});
  for (int t = 0; t < 4; ++t) {
    scorer.Row(At(t));
    if (t == 1) {
      scorer.Edge("a", core::AlertPhase::kRaise);
      scorer.Edge("b", core::AlertPhase::kRaise);
    }
    if (t == 3) {
      scorer.Edge("a", core::AlertPhase::kClear);
      scorer.Edge("b", core::AlertPhase::kClear);
    }
  }
  scorer.Finish();
  EXPECT_EQ(scorer.scores().samples, 4);
  EXPECT_EQ(scorer.scores().flagged, 2);
  EXPECT_EQ(scorer.scores().true_positives, 0);
  EXPECT_DOUBLE_EQ(scorer.scores().precision(), 0.0);
  EXPECT_DOUBLE_EQ(scorer.scores().recall(), 1.0);
  EXPECT_DOUBLE_EQ(scorer.scores().f1(), 0.0);
}

TEST(SeriesPointScorerTest, SeriesPoolByAddingCounts) {
  // Micro average: series 1 has TP 3 of 4 flagged and 3 positives (as above); series 2
  // flags nothing and has 2 positives. Pooled: precision 3/4, recall 3/5,
  // F1 = 2 * 0.75 * 0.6 / 1.35 = 2/3. (A macro average of the F1s, (6/7 + 0) / 2, would
  // differ.)
  PointScores first{.samples = 8, .excluded = 0, .positives = 3, .flagged = 4, .true_positives = 3};
  const PointScores second{
      .samples = 5, .excluded = 0, .positives = 2, .flagged = 0, .true_positives = 0};
  first += second;
  EXPECT_EQ(first.samples, 13);
  EXPECT_DOUBLE_EQ(first.precision(), 0.75);
  EXPECT_DOUBLE_EQ(first.recall(), 0.6);
  EXPECT_NEAR(first.f1(), 2.0 / 3.0, 1e-15);
  // Nothing flagged and nothing positive: the conventions of event scoring, all 1.
  const PointScores quiet{.samples = 5};
  EXPECT_DOUBLE_EQ(quiet.precision(), 1.0);
  EXPECT_DOUBLE_EQ(quiet.recall(), 1.0);
  EXPECT_DOUBLE_EQ(quiet.f1(), 1.0);
}

}  // namespace
}  // namespace nightjar::replay
