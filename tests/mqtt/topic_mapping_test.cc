#include "mqtt/topic_mapping.h"

#include <gtest/gtest.h>

#include <string>

namespace nightjar::mqtt {
namespace {

TopicPattern MakeOk(const std::string& pattern, const std::string& channel) {
  core::Result<TopicPattern> p = TopicPattern::Create(pattern, channel);
  EXPECT_TRUE(p.ok()) << p.status().message();
  return p.ok() ? *p : *TopicPattern::Create("x", "x");
}

std::string PatternError(const std::string& pattern, const std::string& channel) {
  core::Result<TopicPattern> p = TopicPattern::Create(pattern, channel);
  EXPECT_FALSE(p.ok()) << pattern << " -> " << channel;
  if (p.ok()) return "";
  EXPECT_EQ(p.status().code(), core::StatusCode::kInvalidArgument);
  return p.status().message();
}

std::string MapError(const TopicPattern& pattern, const std::string& topic) {
  core::Result<std::string> channel = pattern.Map(topic);
  EXPECT_FALSE(channel.ok()) << topic << " mapped to " << (channel.ok() ? *channel : "");
  if (channel.ok()) return "";
  // Every topic error names the topic first.
  EXPECT_EQ(channel.status().message().rfind("topic " + topic + ": ", 0), 0u)
      << channel.status().message();
  return channel.status().message();
}

TEST(TopicPatternTest, MapsNamedCapturesToTheChannel) {
  const TopicPattern p = MakeOk("brackwater/{area}/{asset}/{signal}", "{area}.{asset}.{signal}");
  EXPECT_EQ(p.filter(), "brackwater/+/+/+");
  EXPECT_EQ(p.levels(), 4u);
  EXPECT_EQ(*p.Map("brackwater/cw2/pump_a/flow"), "cw2.pump_a.flow");
  EXPECT_EQ(*p.Map("brackwater/cw2/pump_b/motor_current"), "cw2.pump_b.motor_current");
  EXPECT_TRUE(p.Matches("brackwater/cw2/pump_a/flow"));
  EXPECT_FALSE(p.Matches("brackwater/cw2/pump_a"));
  EXPECT_FALSE(p.Matches("millpond/cw2/pump_a/flow"));
}

TEST(TopicPatternTest, ReordersAddsTextAndSkipsPlusLevels) {
  const TopicPattern p =
      MakeOk("site/+/{area}/{asset}/telemetry/{signal}", "plant.{asset}-{signal}.{area}");
  EXPECT_EQ(p.filter(), "site/+/+/+/telemetry/+");
  EXPECT_EQ(*p.Map("site/brackwater/cw2/pump_a/telemetry/flow"), "plant.pump_a-flow.cw2");
  EXPECT_FALSE(p.Matches("site/brackwater/cw2/pump_a/status/flow"));
}

TEST(TopicPatternTest, LiteralPatternMapsOneTopicToAFixedChannel) {
  const TopicPattern p = MakeOk("brackwater/cw2/header/pressure", "cw2.header.pressure");
  EXPECT_EQ(p.filter(), "brackwater/cw2/header/pressure");
  EXPECT_EQ(*p.Map("brackwater/cw2/header/pressure"), "cw2.header.pressure");
}

TEST(TopicPatternTest, CaptureMayBeUsedTwiceAndMapToReusesTheString) {
  const TopicPattern p = MakeOk("brackwater/{asset}", "{asset}.{asset}_copy");
  std::string channel = "old contents";
  ASSERT_TRUE(p.MapTo("brackwater/pump_a", &channel).ok());
  EXPECT_EQ(channel, "pump_a.pump_a_copy");
}

TEST(TopicPatternTest, PatternErrorsNameThePatternColumnAndLevel) {
  EXPECT_EQ(PatternError("", "x"), "topic pattern '': column 1 (level 1): empty pattern");
  EXPECT_EQ(PatternError("/brackwater/{a}", "{a}"),
            "topic pattern '/brackwater/{a}': column 1 (level 1): empty level (a leading, "
            "trailing or doubled '/')");
  EXPECT_EQ(PatternError("brackwater//{a}", "{a}"),
            "topic pattern 'brackwater//{a}': column 12 (level 2): empty level (a leading, "
            "trailing or doubled '/')");
  EXPECT_EQ(PatternError("brackwater/{a}/", "{a}"),
            "topic pattern 'brackwater/{a}/': column 16 (level 3): empty level (a leading, "
            "trailing or doubled '/')");
  EXPECT_EQ(PatternError("brackwater/{area/x", "{area}"),
            "topic pattern 'brackwater/{area/x': column 12 (level 2): '{' without '}'");
  EXPECT_EQ(PatternError("brackwater/{a}b", "{a}"),
            "topic pattern 'brackwater/{a}b': column 15 (level 2): text after '}': a capture "
            "must be a whole level");
  EXPECT_EQ(PatternError("brackwater/pump_{id}", "{id}"),
            "topic pattern 'brackwater/pump_{id}': column 17 (level 2): brace inside a level: a "
            "capture must be a whole level");
  EXPECT_EQ(PatternError("brackwater/{}", "x"),
            "topic pattern 'brackwater/{}': column 12 (level 2): empty capture name");
  EXPECT_EQ(PatternError("brackwater/{9lives}", "{9lives}"),
            "topic pattern 'brackwater/{9lives}': column 13 (level 2): capture names are an ASCII "
            "letter or '_' followed by letters, digits or '_'");
  EXPECT_EQ(PatternError("brackwater/{a-b}", "x"),
            "topic pattern 'brackwater/{a-b}': column 14 (level 2): capture names are an ASCII "
            "letter or '_' followed by letters, digits or '_'");
  EXPECT_EQ(PatternError("{a}/{b}/{a}", "{a}.{b}"),
            "topic pattern '{a}/{b}/{a}': column 9 (level 3): capture {a} appears twice");
  EXPECT_EQ(PatternError("brackwater/cw2/#", "x"),
            "topic pattern 'brackwater/cw2/#': column 16 (level 3): '#' is not supported: a "
            "channel needs a fixed number of levels, so name each level with {name} or match it "
            "with '+'");
  EXPECT_EQ(PatternError("brackwater/cw+/{a}", "{a}"),
            "topic pattern 'brackwater/cw+/{a}': column 14 (level 2): '+' inside a level: '+' "
            "must be a whole level");
  std::string deep;
  for (int i = 0; i < 33; ++i) deep += (i ? "/l" : "l");
  EXPECT_NE(PatternError(deep, "x").find("(level 33): more than 32 levels"), std::string::npos);
}

TEST(TopicPatternTest, TemplateErrorsNameTheTemplateAndColumn) {
  const std::string p = "brackwater/{area}/{asset}/{signal}";
  EXPECT_EQ(PatternError(p, ""), "channel template '': column 1: empty template");
  EXPECT_EQ(PatternError(p, "{area}.{assett}.{signal}"),
            "channel template '{area}.{assett}.{signal}': column 8: {assett} is not a capture of "
            "topic pattern 'brackwater/{area}/{asset}/{signal}'");
  EXPECT_EQ(PatternError(p, "{area}.{signal}"),
            "channel template '{area}.{signal}': column 1: capture {asset} of topic pattern "
            "'brackwater/{area}/{asset}/{signal}' is not used, so topics differing only there "
            "would feed one channel");
  EXPECT_EQ(PatternError(p, "{area}.{asset}.{signal"),
            "channel template '{area}.{asset}.{signal': column 16: '{' without '}'");
  EXPECT_EQ(PatternError(p, "{area}.{asset}}.{signal}"),
            "channel template '{area}.{asset}}.{signal}': column 15: '}' without '{'");
  EXPECT_EQ(PatternError(p, "{area}.{asset} {signal}"),
            "channel template '{area}.{asset} {signal}': column 15: character ' ' not allowed "
            "(text may hold letters, digits, '_', '-', '.')");
  EXPECT_EQ(PatternError(p, "{area}..{asset}.{signal}"),
            "channel template '{area}..{asset}.{signal}': column 8: empty channel level (a "
            "leading or doubled '.')");
  EXPECT_EQ(PatternError(p, ".{area}.{asset}.{signal}"),
            "channel template '.{area}.{asset}.{signal}': column 1: empty channel level (a "
            "leading or doubled '.')");
  EXPECT_EQ(PatternError(p, "{area}.{asset}.{signal}."),
            "channel template '{area}.{asset}.{signal}.': column 24: empty channel level (a "
            "trailing '.')");
}

TEST(TopicPatternTest, RejectsTopicsThatDoNotFitAndSaysWhichLevel) {
  const TopicPattern p = MakeOk("brackwater/{area}/{asset}/{signal}", "{area}.{asset}.{signal}");
  EXPECT_EQ(MapError(p, "brackwater/cw2/pump_a"),
            "topic brackwater/cw2/pump_a: has 3 levels, topic pattern "
            "'brackwater/{area}/{asset}/{signal}' wants 4");
  EXPECT_EQ(MapError(p, "brackwater/cw2/pump_a/flow/raw"),
            "topic brackwater/cw2/pump_a/flow/raw: has 5 levels, topic pattern "
            "'brackwater/{area}/{asset}/{signal}' wants 4");
  EXPECT_EQ(MapError(p, "millpond/cw2/pump_a/flow"),
            "topic millpond/cw2/pump_a/flow: level 1 is 'millpond', topic pattern "
            "'brackwater/{area}/{asset}/{signal}' wants 'brackwater'");
  EXPECT_EQ(MapError(p, "brackwater/cw2/pump.a/flow"),
            "topic brackwater/cw2/pump.a/flow: level 3 ({asset} = 'pump.a') contains '.', which "
            "would split the channel name");
  EXPECT_EQ(MapError(p, "brackwater/cw2//flow"),
            "topic brackwater/cw2//flow: level 3 ({asset} = '') is empty");
  EXPECT_EQ(MapError(p, "brackwater/cw2/pump a/flow"),
            "topic brackwater/cw2/pump a/flow: level 3 ({asset} = 'pump a') contains a space or "
            "control character");
  EXPECT_EQ(MapError(p, "brackwater/cw2/pump_*/flow"),
            "topic brackwater/cw2/pump_*/flow: level 3 ({asset} = 'pump_*') contains one of * ? "
            "[ ] { }, which channel names reserve");
}

TEST(TopicPatternTest, ControlCharactersInTopicsAreEscapedInErrors) {
  const TopicPattern p = MakeOk("brackwater/{asset}", "{asset}");
  const core::Result<std::string> channel = p.Map(std::string("brackwater/pump\x07", 16));
  ASSERT_FALSE(channel.ok());
  EXPECT_EQ(channel.status().message(),
            "topic brackwater/pump\\x07: level 2 ({asset} = 'pump\\x07') contains a space or "
            "control character");
}

TEST(TopicPatternTest, FilterMatchesEveryTopicThePatternMaps) {
  const TopicPattern p = MakeOk("brackwater/+/{asset}/{signal}", "{asset}.{signal}");
  for (const char* topic : {"brackwater/cw2/pump_a/flow", "brackwater/cw1/fan/speed"}) {
    EXPECT_TRUE(p.Map(topic).ok()) << topic;
    EXPECT_TRUE(TopicMatchesFilter(p.filter(), topic)) << topic;
  }
}

// The examples of MQTT 3.1.1 (OASIS Standard, 29 October 2014), sections 4.7.1.2,
// 4.7.1.3 and 4.7.2, unchanged in MQTT 5.0 section 4.7.
TEST(TopicMatchesFilterTest, FollowsTheMqttSpecExamples) {
  EXPECT_TRUE(TopicMatchesFilter("sport/tennis/player1/#", "sport/tennis/player1"));
  EXPECT_TRUE(TopicMatchesFilter("sport/tennis/player1/#", "sport/tennis/player1/ranking"));
  EXPECT_TRUE(TopicMatchesFilter("sport/tennis/player1/#", "sport/tennis/player1/score/wimbledon"));
  EXPECT_TRUE(TopicMatchesFilter("sport/#", "sport"));
  EXPECT_TRUE(TopicMatchesFilter("#", "sport/tennis"));
  EXPECT_TRUE(TopicMatchesFilter("sport/tennis/+", "sport/tennis/player1"));
  EXPECT_TRUE(TopicMatchesFilter("sport/tennis/+", "sport/tennis/player2"));
  EXPECT_FALSE(TopicMatchesFilter("sport/tennis/+", "sport/tennis/player1/ranking"));
  EXPECT_FALSE(TopicMatchesFilter("sport/+", "sport"));
  EXPECT_TRUE(TopicMatchesFilter("sport/+", "sport/"));
  EXPECT_TRUE(TopicMatchesFilter("+/+", "/finance"));
  EXPECT_TRUE(TopicMatchesFilter("/+", "/finance"));
  EXPECT_FALSE(TopicMatchesFilter("+", "/finance"));
  EXPECT_FALSE(TopicMatchesFilter("#", "$SYS/broker/uptime"));
  EXPECT_FALSE(TopicMatchesFilter("+/monitor/Clients", "$SYS/monitor/Clients"));
  EXPECT_TRUE(TopicMatchesFilter("$SYS/#", "$SYS/monitor/Clients"));
  EXPECT_TRUE(TopicMatchesFilter("$SYS/monitor/+", "$SYS/monitor/Clients"));
  EXPECT_FALSE(TopicMatchesFilter("sport/tennis", "sport/Tennis"));  // case-sensitive
  EXPECT_FALSE(TopicMatchesFilter("sport/tennis/player1/#", "sport/tennis"));
}

}  // namespace
}  // namespace nightjar::mqtt
