// Event-wise and point-wise scores against labelled windows.
//
// Precision, recall and F1 are the standard information-retrieval definitions (common
// practice): P = TP / (TP + FP), R = TP / (TP + FN), F1 = 2PR / (P + R). The event-wise
// counting rule is ours and is written down in replay_data/FORMAT.md, "Scoring". Every
// expected number below was worked out by hand from that rule; the working is in the
// comment beside each case.
#include "replay/event_scoring.h"

#include <gtest/gtest.h>

#include <cmath>
#include <limits>
#include <span>
#include <string>
#include <vector>

#include "core/alert.h"

namespace nightjar::replay {
namespace {

constexpr core::TimestampUs kUs = core::kMicrosPerSecond;
constexpr core::TimestampUs kDay = 1773014400 * kUs;  // 2026-03-09T00:00:00Z
constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

core::TimestampUs At(double seconds) { return kDay + core::FromSeconds(seconds); }

LabelWindow Window(double start_s, double end_s, const std::string& kind) {
  return {At(start_s), At(end_s), kind};
}

std::vector<Raise> RaisesAt(const std::vector<double>& seconds, const std::string& channel = "c") {
  std::vector<Raise> raises;
  for (double s : seconds) raises.push_back({At(s), channel});
  return raises;
}

void ExpectSameOrNaN(double actual, double expected, const std::string& what) {
  if (std::isnan(expected)) {
    EXPECT_TRUE(std::isnan(actual)) << what << " = " << actual << ", want NaN";
  } else {
    EXPECT_NEAR(actual, expected, 1e-9) << what;
  }
}

struct EventCase {
  const char* name;
  std::vector<double> raises_s;
  double duration_s;
  std::int64_t detected, true_raises, expected_raises, false_alarms;
  double precision, recall, f1, false_alarms_per_day, mean_delay_s;
};

// Windows for the table: A = anomaly [100, 200], B = anomaly [500, 500] (one instant),
// E = event [1000, 1300]; grace 60 s, so A catches raises in [100, 260], B in
// [500, 560] and E excuses raises in [1000, 1360].
std::vector<LabelWindow> TableWindows() {
  return {Window(100, 200, "anomaly"), Window(500, 500, "anomaly"), Window(1000, 1300, "event")};
}

class EventScoringTable : public ::testing::TestWithParam<EventCase> {};

TEST_P(EventScoringTable, MatchesHandWorkedScores) {
  const EventCase& c = GetParam();
  const std::vector<Raise> raises = RaisesAt(c.raises_s);
  const std::vector<LabelWindow> windows = TableWindows();
  const EventScores s = ScoreEvents(raises, windows, c.duration_s);
  EXPECT_EQ(s.windows, 2);
  EXPECT_EQ(s.event_windows, 1);
  EXPECT_EQ(s.ignored_windows, 0);
  EXPECT_EQ(s.raises, static_cast<std::int64_t>(c.raises_s.size()));
  EXPECT_EQ(s.detected, c.detected);
  EXPECT_EQ(s.true_raises, c.true_raises);
  EXPECT_EQ(s.expected_raises, c.expected_raises);
  EXPECT_EQ(s.false_alarms, c.false_alarms);
  ExpectSameOrNaN(s.precision, c.precision, "precision");
  ExpectSameOrNaN(s.recall, c.recall, "recall");
  ExpectSameOrNaN(s.f1, c.f1, "f1");
  ExpectSameOrNaN(s.false_alarms_per_day, c.false_alarms_per_day, "false_alarms_per_day");
  ExpectSameOrNaN(s.mean_delay_s, c.mean_delay_s, "mean_delay_s");
  ASSERT_EQ(s.outcomes.size(), 2u);
}

INSTANTIATE_TEST_SUITE_P(
    HandWorked, EventScoringTable,
    ::testing::Values(
        // No raises: nothing found; precision 1 by our convention (no raise was wrong),
        // recall 0/2 = 0, F1 = 0, no false alarms, no delay.
        EventCase{"no_raises", {}, 86400, 0, 0, 0, 0, 1.0, 0.0, 0.0, 0.0, kNaN},
        // A raise at A's start: A found with delay 0, B missed. P = 1/1, R = 1/2,
        // F1 = 2 * 1 * 0.5 / 1.5 = 2/3.
        EventCase{"raise_at_start", {100}, 86400, 1, 1, 0, 0, 1.0, 0.5, 2.0 / 3.0, 0.0, 0.0},
        // Boundaries: 99.999999 s is 1 us before A (false), 260 s is exactly A's end +
        // grace (true, delay 260 - 100 = 160 s), 260.000001 s is 1 us after it (false).
        // P = 1/3, R = 1/2, F1 = 2 * (1/3) * (1/2) / (5/6) = 0.4; 2 false alarms in 1 day.
        EventCase{"boundaries",
                  {99.999999, 260, 260.000001},
                  86400,
                  1,
                  1,
                  0,
                  2,
                  1.0 / 3.0,
                  0.5,
                  0.4,
                  2.0,
                  160.0},
        // Event window: 1000 (its start) and 1360 (its end + grace) are expected, 1361 is
        // false; 500 finds B with delay 0. P = 1 / (1 + 1) = 0.5 (expected raises left
        // out), R = 1/2, F1 = 0.5; 1 false alarm in half a day = 2 per day.
        EventCase{
            "event_window", {1000, 1360, 1361, 500}, 43200, 1, 1, 2, 1, 0.5, 0.5, 0.5, 2.0, 0.0},
        // Three raises in A, out of order: all true, delay from the earliest (120 - 100).
        // P = 3/3, R = 1/2, F1 = 2/3, mean delay 20 s.
        EventCase{"several_in_one_window",
                  {150, 120, 170},
                  86400,
                  1,
                  3,
                  0,
                  0,
                  1.0,
                  0.5,
                  2.0 / 3.0,
                  0.0,
                  20.0},
        // Both found: 130 (A, delay 30) and 530 (inside B's grace, delay 30). P = R = F1 = 1,
        // mean delay (30 + 30) / 2 = 30 s.
        EventCase{"both_found", {130, 530}, 86400, 2, 2, 0, 0, 1.0, 1.0, 1.0, 0.0, 30.0},
        // No recording length: the rate is unknown (NaN), the counts are not.
        EventCase{"unknown_duration", {5000}, 0, 0, 0, 0, 1, 0.0, 0.0, 0.0, kNaN, kNaN}),
    [](const ::testing::TestParamInfo<EventCase>& param_info) {
      return std::string(param_info.param.name);
    });

TEST(EventScoringTest, OutcomesNameDelayAndFirstChannel) {
  // A found first by "q" at 120 s (delay 20 s) although "p" raised later at 150 s; B missed.
  std::vector<Raise> raises = {{At(150), "p"}, {At(120), "q"}};
  const std::vector<LabelWindow> windows = TableWindows();
  const EventScores s = ScoreEvents(raises, windows, 86400);
  ASSERT_EQ(s.outcomes.size(), 2u);
  EXPECT_TRUE(s.outcomes[0].detected);
  EXPECT_EQ(s.outcomes[0].start, At(100));
  EXPECT_EQ(s.outcomes[0].end, At(200));
  EXPECT_DOUBLE_EQ(s.outcomes[0].delay_s, 20.0);
  EXPECT_EQ(s.outcomes[0].first_channel, "q");
  EXPECT_FALSE(s.outcomes[1].detected);
  EXPECT_TRUE(std::isnan(s.outcomes[1].delay_s));
  EXPECT_EQ(s.outcomes[1].first_channel, "");
}

TEST(EventScoringTest, OverlappingWindowsShareARaiseAndAnomalyBeatsEvent) {
  // X = anomaly [0, 100], Y = anomaly [50, 150], E = event [120, 400], grace 60.
  // 60 s lies in X and Y: one true raise that finds both (delays 60 and 10).
  // 170 s lies in Y's grace [150, 210] and in E: anomaly first, so true, not expected.
  // P = 2/2, R = 2/2, F1 = 1, mean delay (60 + 10) / 2 = 35 s.
  const std::vector<LabelWindow> windows = {Window(0, 100, "anomaly"), Window(50, 150, "anomaly"),
                                            Window(120, 400, "event")};
  const std::vector<Raise> raises = RaisesAt({60, 170});
  const EventScores s = ScoreEvents(raises, windows, 86400);
  EXPECT_EQ(s.detected, 2);
  EXPECT_EQ(s.true_raises, 2);
  EXPECT_EQ(s.expected_raises, 0);
  EXPECT_EQ(s.false_alarms, 0);
  EXPECT_DOUBLE_EQ(s.outcomes[0].delay_s, 60.0);
  EXPECT_DOUBLE_EQ(s.outcomes[1].delay_s, 10.0);
  EXPECT_DOUBLE_EQ(s.mean_delay_s, 35.0);
  EXPECT_DOUBLE_EQ(s.f1, 1.0);
}

TEST(EventScoringTest, NoWindows) {
  // Nothing to find: recall 1 by convention (no window missed). Two raises, both false:
  // P = 0/2 = 0, F1 = 0 (P + R = 1 > 0, 2 * 0 * 1 / 1 = 0); 2 per day over one day.
  const std::vector<Raise> raises = RaisesAt({10, 20});
  const EventScores s = ScoreEvents(raises, {}, 86400);
  EXPECT_EQ(s.windows, 0);
  EXPECT_EQ(s.false_alarms, 2);
  EXPECT_DOUBLE_EQ(s.precision, 0.0);
  EXPECT_DOUBLE_EQ(s.recall, 1.0);
  EXPECT_DOUBLE_EQ(s.f1, 0.0);
  EXPECT_DOUBLE_EQ(s.false_alarms_per_day, 2.0);
  EXPECT_TRUE(std::isnan(s.mean_delay_s));

  // A clean day with a silent detector is perfect: P = R = F1 = 1.
  const EventScores silent = ScoreEvents({}, {}, 86400);
  EXPECT_DOUBLE_EQ(silent.precision, 1.0);
  EXPECT_DOUBLE_EQ(silent.recall, 1.0);
  EXPECT_DOUBLE_EQ(silent.f1, 1.0);
  EXPECT_DOUBLE_EQ(silent.false_alarms_per_day, 0.0);
}

TEST(EventScoringTest, OtherKindsAreIgnored) {
  // A "maintenance" window neither counts for recall nor excuses the raise inside it.
  const std::vector<LabelWindow> windows = {Window(0, 100, "maintenance")};
  const std::vector<Raise> raises = RaisesAt({50});
  const EventScores s = ScoreEvents(raises, windows, 86400);
  EXPECT_EQ(s.ignored_windows, 1);
  EXPECT_EQ(s.windows, 0);
  EXPECT_EQ(s.event_windows, 0);
  EXPECT_EQ(s.false_alarms, 1);
}

TEST(EventScoringTest, GraceIsConfigurable) {
  // A = [100, 200]; a raise at 201 s is inside the default 60 s grace, outside grace 0.
  const std::vector<LabelWindow> windows = {Window(100, 200, "anomaly")};
  const std::vector<Raise> raises = RaisesAt({201});
  EXPECT_EQ(ScoreEvents(raises, windows, 86400).detected, 1);
  const EventScores strict = ScoreEvents(raises, windows, 86400, {.grace_s = 0});
  EXPECT_EQ(strict.detected, 0);
  EXPECT_EQ(strict.false_alarms, 1);
  // With grace 0 the end itself still counts (windows are inclusive).
  const std::vector<Raise> at_end = RaisesAt({200});
  EXPECT_EQ(ScoreEvents(at_end, windows, 86400, {.grace_s = 0}).detected, 1);
}

TEST(EventScoringTest, ValidatesGrace) {
  EXPECT_TRUE(ValidateScoringOptions({}).ok());
  EXPECT_TRUE(ValidateScoringOptions({.grace_s = 0}).ok());
  for (double bad : {-1.0, 86401.0, kNaN}) {
    const core::Status status = ValidateScoringOptions({.grace_s = bad});
    EXPECT_EQ(status.code(), core::StatusCode::kInvalidArgument) << bad;
    EXPECT_NE(status.message().find("grace_s"), std::string::npos) << status.message();
  }
}

TEST(EventScoringTest, PerChannelAndPooled) {
  // A = anomaly [100, 200], B = anomaly [500, 500]. One fault raised on three channels
  // (p 110, q 120, r 130) plus a false alarm on q at 3000 s; s never raises; t raises
  // but is not listed.
  //  overall: found A only (delay 10, first p), raises 5, true 3, false 2 (q 3000, t 4000):
  //           P = 3/5 = 0.6, R = 1/2, F1 = 2 * 0.6 * 0.5 / 1.1 = 6/11.
  //  p, r:    1 true raise: P = 1, R = 1/2, F1 = 2/3.
  //  q:       1 true, 1 false: P = 1/2, R = 1/2, F1 = 1/2.
  //  s:       no raise: P = 1 (convention), R = 0, F1 = 0.
  //  t:       1 false: P = 0, R = 0, F1 = 0; appended after the listed channels.
  const std::vector<LabelWindow> windows = {Window(100, 200, "anomaly"),
                                            Window(500, 500, "anomaly")};
  const std::vector<Raise> raises = {
      {At(110), "p"}, {At(120), "q"}, {At(130), "r"}, {At(3000), "q"}, {At(4000), "t"}};
  const std::vector<std::string> channels = {"p", "q", "r", "s"};
  const EventScoreTable table = ScoreEventsByChannel(raises, windows, channels, 86400);

  EXPECT_EQ(table.overall.detected, 1);
  EXPECT_EQ(table.overall.raises, 5);
  EXPECT_EQ(table.overall.true_raises, 3);
  EXPECT_EQ(table.overall.false_alarms, 2);
  EXPECT_NEAR(table.overall.precision, 0.6, 1e-12);
  EXPECT_NEAR(table.overall.recall, 0.5, 1e-12);
  EXPECT_NEAR(table.overall.f1, 6.0 / 11.0, 1e-12);
  EXPECT_EQ(table.overall.outcomes[0].first_channel, "p");
  EXPECT_DOUBLE_EQ(table.overall.outcomes[0].delay_s, 10.0);

  ASSERT_EQ(table.channels.size(), 5u);
  const std::vector<std::string> order = {"p", "q", "r", "s", "t"};
  const std::vector<double> precision = {1.0, 0.5, 1.0, 1.0, 0.0};
  const std::vector<double> recall = {0.5, 0.5, 0.5, 0.0, 0.0};
  const std::vector<double> f1 = {2.0 / 3.0, 0.5, 2.0 / 3.0, 0.0, 0.0};
  for (std::size_t i = 0; i < order.size(); ++i) {
    const ChannelEventScores& row = table.channels[i];
    EXPECT_EQ(row.channel, order[i]);
    EXPECT_NEAR(row.scores.precision, precision[i], 1e-12) << row.channel;
    EXPECT_NEAR(row.scores.recall, recall[i], 1e-12) << row.channel;
    EXPECT_NEAR(row.scores.f1, f1[i], 1e-12) << row.channel;
    EXPECT_EQ(row.scores.windows, 2) << row.channel;  // every channel sees all windows
  }
}

TEST(EventScoringTest, TheOverallRowCountsAnnunciatedRaisesOnlyChannelRowsCountAll) {
  // The fault of PerChannelAndPooled, now grouped into asset episodes: q (120) and r (130)
  // joined p's episode (110) and were not annunciated; q's 3000 s and t's 4000 s raises
  // each opened an episode of their own.
  //  overall: raises 3 (p 110, q 3000, t 4000), true 1, false 2: P = 1/3, R = 1/2,
  //           F1 = 2 * (1/3) * (1/2) / (5/6) = 0.4.
  //  q:       both of its raises: 1 true, 1 false, P = 1/2 as before.
  const std::vector<LabelWindow> windows = {Window(100, 200, "anomaly"),
                                            Window(500, 500, "anomaly")};
  const std::vector<Raise> raises = {{At(110), "p", true},
                                     {At(120), "q", false},
                                     {At(130), "r", false},
                                     {At(3000), "q", true},
                                     {At(4000), "t", true}};
  const std::vector<std::string> channels = {"p", "q", "r"};
  const EventScoreTable table = ScoreEventsByChannel(raises, windows, channels, 86400);
  EXPECT_EQ(table.overall.raises, 3);
  EXPECT_EQ(table.overall.true_raises, 1);
  EXPECT_EQ(table.overall.false_alarms, 2);
  EXPECT_NEAR(table.overall.precision, 1.0 / 3.0, 1e-12);
  EXPECT_NEAR(table.overall.f1, 0.4, 1e-12);
  ASSERT_GE(table.channels.size(), 3u);
  EXPECT_EQ(table.channels[1].channel, "q");
  EXPECT_EQ(table.channels[1].scores.raises, 2);
  EXPECT_NEAR(table.channels[1].scores.precision, 0.5, 1e-12);
  EXPECT_EQ(table.channels[2].scores.raises, 1);  // r's own row still sees its raise
}

TEST(EventScoringTest, RaisesOfCarriesTheAnnunciatedMark) {
  std::vector<core::Alert> alerts(2);
  alerts[0].channel = "p";
  alerts[1].channel = "q";
  alerts[1].annunciated = false;
  const std::vector<Raise> raises = RaisesOf(alerts);
  ASSERT_EQ(raises.size(), 2u);
  EXPECT_TRUE(raises[0].annunciated);
  EXPECT_FALSE(raises[1].annunciated);
}

TEST(EventScoringTest, RaisesOfKeepsOnlyRaises) {
  std::vector<core::Alert> alerts(3);
  alerts[0].time = At(1);
  alerts[0].channel = "a";
  alerts[1].time = At(2);
  alerts[1].channel = "a";
  alerts[1].phase = core::AlertPhase::kClear;
  alerts[2].time = At(3);
  alerts[2].channel = "b";
  // A recognised expected event is a notice, not an alarm: not a raise to score.
  alerts.push_back(alerts[2]);
  alerts[3].kind = core::AlertKind::kEvent;
  alerts[3].detector = core::Detector::kTemplate;
  const std::vector<Raise> raises = RaisesOf(alerts);
  ASSERT_EQ(raises.size(), 2u);
  EXPECT_EQ(raises[0].time, At(1));
  EXPECT_EQ(raises[0].channel, "a");
  EXPECT_EQ(raises[1].time, At(3));
  EXPECT_EQ(raises[1].channel, "b");
}

std::vector<core::TimestampUs> Seconds(int n) {
  std::vector<core::TimestampUs> times;
  for (int i = 0; i < n; ++i) times.push_back(At(i));
  return times;
}

TEST(PointScoringTest, HandWorked) {
  // Samples at 0..9 s; anomaly [3, 5] -> positives 3, 4, 5; event [8, 8].
  // Flagged: 2, 3, 4, 8, 9.
  const std::vector<core::TimestampUs> times = Seconds(10);
  const std::vector<bool> flagged = {false, false, true,  true, true,
                                     false, false, false, true, true};
  const std::vector<LabelWindow> windows = {Window(3, 5, "anomaly"), Window(8, 8, "event")};

  // Grace 0: only sample 8 is excluded. Judged flagged: 2, 3, 4, 9 -> 4; TP 3, 4 -> 2.
  // P = 2/4, R = 2/3, F1 = 2 * (1/2) * (2/3) / (7/6) = 4/7.
  core::Result<PointScores> strict = ScorePoints(times, flagged, windows, {.grace_s = 0});
  ASSERT_TRUE(strict.ok()) << strict.status().message();
  EXPECT_EQ(strict->samples, 10);
  EXPECT_EQ(strict->excluded, 1);
  EXPECT_EQ(strict->positives, 3);
  EXPECT_EQ(strict->flagged, 4);
  EXPECT_EQ(strict->true_positives, 2);
  EXPECT_NEAR(strict->precision(), 0.5, 1e-12);
  EXPECT_NEAR(strict->recall(), 2.0 / 3.0, 1e-12);
  EXPECT_NEAR(strict->f1(), 4.0 / 7.0, 1e-12);

  // Default grace 60 s: the event excludes 8 and 9. Flagged 2, 3, 4 -> 3; TP 2.
  // P = R = 2/3, F1 = 2/3. The positives are not widened by the grace.
  core::Result<PointScores> graced = ScorePoints(times, flagged, windows);
  ASSERT_TRUE(graced.ok());
  EXPECT_EQ(graced->excluded, 2);
  EXPECT_EQ(graced->positives, 3);
  EXPECT_EQ(graced->flagged, 3);
  EXPECT_NEAR(graced->f1(), 2.0 / 3.0, 1e-12);

  // Pooling adds counts (micro-average): 4 + 3 flagged, 2 + 2 TP, 3 + 3 positives:
  // P = 4/7, R = 4/6, F1 = 2 * (4/7) * (2/3) / (4/7 + 2/3) = (16/21) / (26/21) = 8/13.
  PointScores pooled = *strict;
  pooled += *graced;
  EXPECT_EQ(pooled.samples, 20);
  EXPECT_EQ(pooled.flagged, 7);
  EXPECT_NEAR(pooled.f1(), 8.0 / 13.0, 1e-12);
}

TEST(PointScoringTest, EmptyConventionsAndSizeMismatch) {
  // Nothing flagged, nothing positive: P = R = 1, F1 = 1.
  const std::vector<core::TimestampUs> times = Seconds(3);
  core::Result<PointScores> none = ScorePoints(times, {false, false, false}, {});
  ASSERT_TRUE(none.ok());
  EXPECT_DOUBLE_EQ(none->f1(), 1.0);
  // Flagged with nothing positive: P = 0, F1 = 0.
  core::Result<PointScores> noisy = ScorePoints(times, {true, false, false}, {});
  ASSERT_TRUE(noisy.ok());
  EXPECT_DOUBLE_EQ(noisy->precision(), 0.0);
  EXPECT_DOUBLE_EQ(noisy->f1(), 0.0);

  core::Result<PointScores> bad = ScorePoints(times, {true}, {});
  ASSERT_FALSE(bad.ok());
  EXPECT_EQ(bad.status().code(), core::StatusCode::kInvalidArgument);
  EXPECT_NE(bad.status().message().find("3 times but 1 flags"), std::string::npos)
      << bad.status().message();
}

struct Edge {
  core::TimestampUs time;
  core::AlertPhase phase;
};

TEST(PointScoringTest, FlagsWhileActive) {
  const std::vector<core::TimestampUs> times = Seconds(10);
  using P = core::AlertPhase;
  // Raise at 2, clear at 5: the sample at 5 is already clear -> 2, 3, 4.
  const std::vector<Edge> one = {{At(2), P::kRaise}, {At(5), P::kClear}};
  EXPECT_EQ(FlagsWhileActive(std::span<const core::TimestampUs>(times), std::span<const Edge>(one)),
            (std::vector<bool>{false, false, true, true, true, false, false, false, false, false}));
  // Two alarms on one channel: raise 1, raise 3, clear 4, clear 6 -> active 1..5.
  const std::vector<Edge> two = {
      {At(1), P::kRaise}, {At(3), P::kRaise}, {At(4), P::kClear}, {At(6), P::kClear}};
  EXPECT_EQ(FlagsWhileActive(std::span<const core::TimestampUs>(times), std::span<const Edge>(two)),
            (std::vector<bool>{false, true, true, true, true, true, false, false, false, false}));
  // A clear whose raise came before the recording, then a raise at 7 -> 7, 8, 9.
  const std::vector<Edge> cut = {{At(0), P::kClear}, {At(7), P::kRaise}};
  EXPECT_EQ(FlagsWhileActive(times, cut),
            (std::vector<bool>{false, false, false, false, false, false, false, true, true, true}));
}

}  // namespace
}  // namespace nightjar::replay
