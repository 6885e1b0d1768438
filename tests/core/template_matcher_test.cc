// Expected-event recognition on a simulated CW2 motor current: a pump start (inrush
// spike decaying to the running current) is found where it happened and nowhere else.
#include "core/template_matcher.h"

#include <gtest/gtest.h>

#include <cmath>
#include <random>
#include <vector>

#include "support/allocation_counter.h"

namespace nightjar::core {
namespace {

// 60 s of a direct-on-line start: ~6x inrush for a few seconds, decaying to 35 A
// (common practice: DOL starting current 5-8x full-load current).
std::vector<double> PumpStart(double scale = 1.0) {
  std::vector<double> shape;
  for (int i = 0; i < 60; ++i) {
    const double t = i;
    double current = 0.0;
    if (i >= 5) current = 35.0 + 175.0 * std::exp(-(t - 5.0) / 3.0);
    shape.push_back(scale * current);
  }
  return shape;
}

EventTemplate StartTemplate() {
  EventTemplate t;
  t.name = "pump_start";
  t.shape = PumpStart();
  return t;
}

TEST(TemplateMatcherTest, FindsThePumpStartOnceAndNothingElse) {
  TemplateMatcher matcher(StartTemplate());
  std::mt19937_64 rng(3);
  std::normal_distribution<double> noise(0.0, 0.8);
  // 10 min stopped, a start at t = 600 stretched by 10 % and slightly smaller (warping),
  // then 20 min running with noise.
  std::vector<double> series(600, 0.0);
  for (int i = 0; i < 66; ++i) {
    const double u = i / 1.1;
    const int k = static_cast<int>(u);
    series.push_back(0.9 * PumpStart()[static_cast<std::size_t>(std::min(k, 59))]);
  }
  for (int i = 0; i < 1200; ++i) series.push_back(31.5);
  std::vector<int> matches;
  for (std::size_t i = 0; i < series.size(); ++i) {
    if (matcher.Add(series[i] + noise(rng))) matches.push_back(static_cast<int>(i));
  }
  ASSERT_EQ(matches.size(), 1u);
  // The match comes once the inrush and most of its decay are in view (warping within
  // the band absorbs the rest), and before the stretched event is over.
  EXPECT_GE(matches[0], 600 + 45);
  EXPECT_LE(matches[0], 600 + 66 + 5);
}

TEST(TemplateMatcherTest, NoiseAndSmallWigglesDoNotMatch) {
  TemplateMatcher matcher(StartTemplate());
  std::mt19937_64 rng(4);
  std::normal_distribution<double> noise(0.0, 1.0);
  int matches = 0;
  for (int i = 0; i < 20000; ++i) {
    if (matcher.Add(35.0 + noise(rng))) ++matches;
  }
  EXPECT_EQ(matches, 0) << "running current with noise is not a start";
  // A start-shaped wiggle of 2 % of the template's size: too small to be the event.
  TemplateMatcher small(StartTemplate());
  int small_matches = 0;
  for (const double v : PumpStart(0.02)) {
    if (small.Add(35.0 + v)) ++small_matches;
  }
  EXPECT_EQ(small_matches, 0);
}

TEST(TemplateMatcherTest, RejectsBadTemplatesNamingTheField) {
  EventTemplate t = StartTemplate();
  t.shape = {1.0, 2.0};
  EXPECT_NE(ValidateEventTemplate(t).message().find("shape"), std::string::npos);
  t = StartTemplate();
  t.shape.assign(60, 4.0);
  EXPECT_FALSE(ValidateEventTemplate(t).ok());
  t = StartTemplate();
  t.max_distance = 0.0;
  EXPECT_NE(ValidateEventTemplate(t).message().find("max_distance"), std::string::npos);
  EXPECT_TRUE(ValidateEventTemplate(StartTemplate()).ok());
}

TEST(TemplateMatcherTest, AddDoesNotAllocate) {
  TemplateMatcher matcher(StartTemplate());
  const std::vector<double> start = PumpStart();
  testing::AllocationCounter counter;
  for (int round = 0; round < 5; ++round) {
    for (const double v : start) matcher.Add(v);
  }
  EXPECT_EQ(counter.count(), 0u);
}

}  // namespace
}  // namespace nightjar::core
