// AlarmEpisodes: one alarm episode per asset. The rule (first-out annunciated, later
// members of the same episode suppressed by design, the last clear ends the episode) is
// ISA-18.2 designed suppression with first-out grouping (ANSI/ISA-18.2-2016, recalled
// from memory); the flood figure below, 10 alarms in 10 minutes per operator, is the
// ISA-18.2 / EEMUA 191 flood threshold (../shared/references/references.md, "Alarm flood").
#include "core/alarm_episodes.h"

#include <gtest/gtest.h>

#include <string>
#include <vector>

namespace nightjar::core {
namespace {

constexpr TimestampUs kT0 = 1'780'000'000LL * kMicrosPerSecond;
constexpr TimestampUs kWindow = 600 * kMicrosPerSecond;  // an episode window of 10 min

Alert Edge(const std::string& channel, AlertPhase phase, int second,
           Priority priority = Priority::kMedium, AlertKind kind = AlertKind::kAnomaly) {
  Alert alert;
  alert.time = kT0 + second * kMicrosPerSecond;
  alert.channel = channel;
  alert.kind = kind;
  alert.phase = phase;
  alert.priority = priority;
  return alert;
}

TEST(AssetOfChannelTest, TheDefaultIsTheNameBeforeItsLastDot) {
  EXPECT_EQ(AssetOfChannel("cw2.pump_a.flow", ""), "cw2.pump_a");
  EXPECT_EQ(AssetOfChannel("cw2.pump_a.motor.current", ""), "cw2.pump_a.motor");
  EXPECT_EQ(AssetOfChannel("Current", ""), "");  // no dot: grouped with no other
  EXPECT_EQ(AssetOfChannel(".flow", ""), "");
  EXPECT_EQ(AssetOfChannel("cw2.pump_a.flow", "none"), "");
  EXPECT_EQ(AssetOfChannel("Current", "rig"), "rig");
}

TEST(AlarmEpisodesTest, OnlyTheFirstOutRaiseAndTheLastClearAreAnnunciated) {
  AlarmEpisodes episodes;
  Alert a = Edge("p.flow", AlertPhase::kRaise, 0);
  Alert b = Edge("p.pressure", AlertPhase::kRaise, 5);
  Alert a_clear = Edge("p.flow", AlertPhase::kClear, 60);
  Alert b_clear = Edge("p.pressure", AlertPhase::kClear, 90);
  episodes.Annotate("p", kWindow, a);
  EXPECT_EQ(episodes.open_episodes(), 1u);
  episodes.Annotate("p", kWindow, b);
  episodes.Annotate("p", kWindow, a_clear);
  EXPECT_EQ(episodes.open_episodes(), 1u);  // the pressure is still in alarm
  episodes.Annotate("p", kWindow, b_clear);
  EXPECT_EQ(episodes.open_episodes(), 0u);

  EXPECT_TRUE(a.annunciated);
  EXPECT_FALSE(b.annunciated);
  EXPECT_FALSE(a_clear.annunciated);
  EXPECT_TRUE(b_clear.annunciated);
  for (const Alert* alert : {&a, &b, &a_clear, &b_clear}) {
    EXPECT_EQ(alert->asset, "p");
    EXPECT_EQ(alert->episode_first_out, "p.flow");
    EXPECT_EQ(alert->episode_since, kT0);
  }
  EXPECT_EQ(a.episode_active, 1);
  EXPECT_EQ(b.episode_active, 2);
  EXPECT_EQ(a_clear.episode_active, 1);
  EXPECT_EQ(b_clear.episode_active, 0);
  EXPECT_EQ(episodes.episodes_opened(), 1u);
}

TEST(AlarmEpisodesTest, AMemberThatClearsAndRaisesAgainInsideTheEpisodeIsNotANewAlarm) {
  AlarmEpisodes episodes;
  std::vector<Alert> edges = {
      Edge("p.flow", AlertPhase::kRaise, 0),      Edge("p.pressure", AlertPhase::kRaise, 2),
      Edge("p.pressure", AlertPhase::kClear, 40), Edge("p.pressure", AlertPhase::kRaise, 50),
      Edge("p.pressure", AlertPhase::kClear, 80), Edge("p.pressure", AlertPhase::kRaise, 95),
  };
  int annunciated = 0;
  for (Alert& edge : edges) {
    episodes.Annotate("p", kWindow, edge);
    annunciated += edge.annunciated ? 1 : 0;
  }
  EXPECT_EQ(annunciated, 1);  // the chattering member never reaches the annunciator
  EXPECT_EQ(edges.back().episode_active, 2);
}

TEST(AlarmEpisodesTest, ARaiseAfterTheEpisodeEndedOpensANewOne) {
  AlarmEpisodes episodes;
  Alert first = Edge("p.flow", AlertPhase::kRaise, 0);
  Alert first_clear = Edge("p.flow", AlertPhase::kClear, 30);
  Alert second = Edge("p.pressure", AlertPhase::kRaise, 600);
  episodes.Annotate("p", kWindow, first);
  episodes.Annotate("p", kWindow, first_clear);
  episodes.Annotate("p", kWindow, second);
  EXPECT_TRUE(first_clear.annunciated);  // a lone first-out: its clear ends the episode
  EXPECT_TRUE(second.annunciated);
  EXPECT_EQ(second.episode_first_out, "p.pressure");
  EXPECT_EQ(second.episode_since, kT0 + 600 * kMicrosPerSecond);
  EXPECT_EQ(episodes.episodes_opened(), 2u);
}

TEST(AlarmEpisodesTest, AMemberOfHigherPriorityIsAnnunciatedOneOfEqualPriorityIsNot) {
  AlarmEpisodes episodes;
  Alert low = Edge("p.temperature", AlertPhase::kRaise, 0, Priority::kLow);
  Alert low_too = Edge("p.vibration", AlertPhase::kRaise, 1, Priority::kLow);
  Alert high = Edge("p.pressure", AlertPhase::kRaise, 2, Priority::kHigh);
  Alert medium = Edge("p.flow", AlertPhase::kRaise, 3, Priority::kMedium);
  for (Alert* alert : {&low, &low_too, &high, &medium}) episodes.Annotate("p", kWindow, *alert);
  EXPECT_TRUE(low.annunciated);
  EXPECT_FALSE(low_too.annunciated);
  EXPECT_TRUE(high.annunciated);
  EXPECT_FALSE(medium.annunciated);  // below the high one already shown
}

TEST(AlarmEpisodesTest, ARaiseLaterThanTheWindowAfterTheLastAnnunciatedOneIsAnnunciated) {
  // p.flow stands in alarm for an hour; the pressure raises 10 min + 1 s after the flow's
  // raise (annunciated), the temperature 5 min after that (not), the vibration 10 min
  // + 1 s after the pressure (annunciated): at most one per window, never none.
  AlarmEpisodes episodes;
  Alert flow = Edge("p.flow", AlertPhase::kRaise, 0);
  Alert pressure = Edge("p.pressure", AlertPhase::kRaise, 601);
  Alert temperature = Edge("p.temperature", AlertPhase::kRaise, 901);
  Alert vibration = Edge("p.vibration", AlertPhase::kRaise, 1202);
  Alert just_inside = Edge("p.level", AlertPhase::kRaise, 1802);  // exactly one window
  for (Alert* alert : {&flow, &pressure, &temperature, &vibration, &just_inside}) {
    episodes.Annotate("p", kWindow, *alert);
  }
  EXPECT_TRUE(flow.annunciated);
  EXPECT_TRUE(pressure.annunciated);
  EXPECT_FALSE(temperature.annunciated);
  EXPECT_TRUE(vibration.annunciated);
  EXPECT_FALSE(just_inside.annunciated);
  EXPECT_EQ(vibration.episode_first_out, "p.flow");  // still the one episode
  EXPECT_EQ(episodes.episodes_opened(), 1u);
}

TEST(AlarmEpisodesTest, UngroupedChannelsSensorAlarmsAndEventsAreAlwaysAnnunciated) {
  AlarmEpisodes episodes;
  Alert lone_a = Edge("FT101", AlertPhase::kRaise, 0);
  Alert lone_b = Edge("FT102", AlertPhase::kRaise, 1);
  episodes.Annotate("", kWindow, lone_a);
  episodes.Annotate("", kWindow, lone_b);
  Alert anomaly = Edge("p.flow", AlertPhase::kRaise, 2);
  Alert gap = Edge("p.pressure", AlertPhase::kRaise, 3, Priority::kLow, AlertKind::kSensor);
  Alert notice = Edge("p.pressure", AlertPhase::kRaise, 4, Priority::kLow, AlertKind::kEvent);
  episodes.Annotate("p", kWindow, anomaly);
  episodes.Annotate("p", kWindow, gap);
  episodes.Annotate("p", kWindow, notice);
  EXPECT_TRUE(lone_a.annunciated);
  EXPECT_TRUE(lone_b.annunciated);
  EXPECT_TRUE(lone_a.asset.empty());
  EXPECT_TRUE(gap.annunciated);
  EXPECT_TRUE(gap.asset.empty());  // data quality of one instrument: no episode
  EXPECT_TRUE(notice.annunciated);
  EXPECT_EQ(anomaly.episode_active, 1);  // the sensor alarm did not join
}

TEST(AlarmEpisodesTest, ShelvingTheLastMemberEndsTheEpisodeSoTheNextFaultIsAnnunciated) {
  AlarmEpisodes episodes;
  Alert a = Edge("p.flow", AlertPhase::kRaise, 0);
  episodes.Annotate("p", kWindow, a);
  episodes.NoteSilenced("p", "p.flow");  // its clear will never be published
  EXPECT_EQ(episodes.open_episodes(), 0u);
  Alert b = Edge("p.pressure", AlertPhase::kRaise, 3600);
  episodes.Annotate("p", kWindow, b);
  EXPECT_TRUE(b.annunciated);
  episodes.NoteSilenced("q", "q.flow");  // unknown: ignored
  EXPECT_EQ(episodes.open_episodes(), 1u);
}

TEST(AlarmEpisodesTest, AChannelRestoredInAlarmKeepsItsEpisodeOpen) {
  AlarmEpisodes episodes;
  episodes.NoteActive("p", "p.flow", kT0, Priority::kMedium);
  Alert b = Edge("p.pressure", AlertPhase::kRaise, 10);
  episodes.Annotate("p", kWindow, b);
  EXPECT_FALSE(b.annunciated);
  EXPECT_EQ(b.episode_first_out, "p.flow");
  Alert a_clear = Edge("p.flow", AlertPhase::kClear, 20);
  Alert b_clear = Edge("p.pressure", AlertPhase::kClear, 30);
  episodes.Annotate("p", kWindow, a_clear);
  episodes.Annotate("p", kWindow, b_clear);
  EXPECT_TRUE(b_clear.annunciated);
}

TEST(AlarmEpisodesTest, AClearOfAChannelInNoEpisodeIsNotAnnunciatedAndNamesNoEpisode) {
  AlarmEpisodes episodes;
  Alert clear = Edge("p.flow", AlertPhase::kClear, 0);  // e.g. a reset of a shelved alarm
  episodes.Annotate("p", kWindow, clear);
  EXPECT_FALSE(clear.annunciated);
  EXPECT_TRUE(clear.episode_first_out.empty());
  EXPECT_EQ(clear.episode_since, 0);
}

// One fault on an eight-channel asset, each channel raising a few seconds after the last:
// ungrouped that is 8 alarms inside 10 minutes, close to the flood threshold (10 in 10
// minutes); grouped it is one.
TEST(AlarmEpisodesTest, OneFaultOnEightChannelsIsOneAnnunciatedAlarm) {
  AlarmEpisodes episodes;
  int annunciated_raises = 0;
  for (int i = 0; i < 8; ++i) {
    Alert raise = Edge("rig.channel" + std::to_string(i), AlertPhase::kRaise, 20 * i);
    episodes.Annotate("rig", kWindow, raise);
    annunciated_raises += raise.annunciated ? 1 : 0;
  }
  EXPECT_EQ(annunciated_raises, 1);
  EXPECT_EQ(episodes.episodes_opened(), 1u);
}

}  // namespace
}  // namespace nightjar::core
