// GlobMatch / ValidateGlob: the channel-name globs of `channels[].match` (lib/config/glob.h).
// Expected values follow the documented semantics; the * / ** split is the common practice
// of path globs (gitignore, Ant), with '.' as the level separator.
#include "config/glob.h"

#include <gtest/gtest.h>

#include <string>

namespace nightjar::config {
namespace {

TEST(GlobMatchTest, LiteralMatchesOnlyItself) {
  EXPECT_TRUE(GlobMatch("cw2.pump_a.flow", "cw2.pump_a.flow"));
  EXPECT_FALSE(GlobMatch("cw2.pump_a.flow", "cw2.pump_a.flow2"));
  EXPECT_FALSE(GlobMatch("cw2.pump_a.flow", "cw2.pump_a.flo"));
  EXPECT_FALSE(GlobMatch("cw2.pump_a.flow", "CW2.pump_a.flow"));  // case-sensitive
}

TEST(GlobMatchTest, StarStaysWithinOneLevel) {
  EXPECT_TRUE(GlobMatch("cw2.pump_a.*", "cw2.pump_a.flow"));
  EXPECT_TRUE(GlobMatch("cw2.pump_a.*", "cw2.pump_a."));  // * may match nothing
  EXPECT_FALSE(GlobMatch("cw2.pump_a.*", "cw2.pump_a.motor.current"));
  EXPECT_FALSE(GlobMatch("cw2.pump_a.*", "cw2.pump_a"));
  EXPECT_TRUE(GlobMatch("cw2.*.flow", "cw2.pump_a.flow"));
  EXPECT_FALSE(GlobMatch("cw2.*.flow", "cw2.pump_a.x.flow"));
  EXPECT_TRUE(GlobMatch("cw2.pump_*.flow", "cw2.pump_b.flow"));
  EXPECT_TRUE(GlobMatch("*_temp", "bearing_temp"));
  EXPECT_FALSE(GlobMatch("*_temp", "cw2.bearing_temp"));
  EXPECT_TRUE(GlobMatch("*", "anything"));
  EXPECT_FALSE(GlobMatch("*", "a.b"));
}

TEST(GlobMatchTest, DoubleStarCrossesLevels) {
  EXPECT_TRUE(GlobMatch("cw2.**", "cw2.pump_a.flow"));
  EXPECT_TRUE(GlobMatch("cw2.**", "cw2.tank.level"));
  EXPECT_FALSE(GlobMatch("cw2.**", "cw3.tank.level"));
  EXPECT_TRUE(GlobMatch("**", "cw2.pump_a.flow"));
  EXPECT_TRUE(GlobMatch("**", ""));
  EXPECT_TRUE(GlobMatch("**.flow", "cw2.pump_a.flow"));
  EXPECT_TRUE(GlobMatch("cw2.**.level", "cw2.tank.level"));
  EXPECT_TRUE(GlobMatch("cw2.**.level", "cw2.a.b.c.level"));
  EXPECT_FALSE(GlobMatch("cw2.**.level", "cw2.level"));  // the dots around ** are literal
  EXPECT_TRUE(GlobMatch("**temp", "cw2.pump_a.bearing_temp"));
}

TEST(GlobMatchTest, QuestionMarkIsOneCharacterButNotADot) {
  EXPECT_TRUE(GlobMatch("cw2.pump_?.flow", "cw2.pump_a.flow"));
  EXPECT_FALSE(GlobMatch("cw2.pump_?.flow", "cw2.pump_ab.flow"));
  EXPECT_FALSE(GlobMatch("cw2.pump_?.flow", "cw2.pump_.flow"));
  EXPECT_FALSE(GlobMatch("cw2?pump_a", "cw2.pump_a"));
}

TEST(GlobMatchTest, ManyStarsStayFast) {
  // A backtracking matcher takes exponential time on this (common practice: the classic
  // "a*a*a*...b" glob denial of service); the DP matcher answers at once.
  const std::string channel(200, 'a');
  EXPECT_FALSE(GlobMatch("**a**a**a**a**a**a**a**a**a**a**b", channel));
  EXPECT_TRUE(GlobMatch("*a*a*a*a*a*a*a*a*a*a*", channel));
}

TEST(ValidateGlobTest, AcceptsTheDocumentedForms) {
  for (const char* pattern : {"cw2.pump_a.flow", "cw2.*", "cw2.**", "**", "*", "a?c.d",
                              "cw2.pump_a.bearing_temp", "site-1.line_2.*"}) {
    EXPECT_TRUE(ValidateGlob(pattern).ok()) << pattern;
  }
}

TEST(ValidateGlobTest, RejectsMalformedPatternsWithAReason) {
  for (const char* pattern :
       {"", "***", "cw2..flow", ".cw2", "cw2.", "cw2 .flow", "cw2.[ab]", "cw2.{a,b}", "a\tb"}) {
    const core::Status s = ValidateGlob(pattern);
    EXPECT_FALSE(s.ok()) << "'" << pattern << "'";
    EXPECT_FALSE(s.message().empty());
  }
}

}  // namespace
}  // namespace nightjar::config
