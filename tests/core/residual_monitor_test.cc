// The residual charts keep the false-alarm budget they were designed for, on white
// and on autocorrelated in-control residuals.
#include "core/residual_monitor.h"

#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <random>

#include "core/alarm.h"
#include "core/threshold_design.h"

namespace nightjar::core {
namespace {

constexpr int kSamples = 1'000'000;
constexpr int kLearnFirst = 5'000;
// A generous budget so 1e6 samples hold enough alerts to measure a rate: 50 per day at
// 1 Hz is 579 expected in 1e6 samples if every chart's false alerts were disjoint.
constexpr double kBudgetPerDay = 50.0;

struct RateResult {
  int raises = 0;
  double expected = 0.0;  // budget * days
};

// Feeds AR(1) noise with lag-1 autocorrelation phi and unit marginal variance through a
// monitor and the engine's default anomaly alarm timing; counts raises.
RateResult CountFalseAlarms(double phi, bool correct, std::uint64_t seed) {
  ResidualMonitorOptions options;
  options.correct_autocorrelation = correct;
  ResidualMonitor monitor(options);
  ThresholdOptions budget;
  budget.false_alarms_per_day = kBudgetPerDay;
  ThresholdDesigner designer;
  Alarm alarm(
      AlarmTiming{.on_delay_s = 0.0, .off_delay_s = 30.0, .deadband = 0.2, .chatter_raises = 0});

  std::mt19937_64 rng(seed);
  std::normal_distribution<double> innovation(0.0, std::sqrt(1.0 - phi * phi));
  double x = innovation(rng) / std::sqrt(1.0 - phi * phi);
  RateResult result;
  for (int i = 0; i < kLearnFirst + kSamples; ++i) {
    x = phi * x + innovation(rng);
    if (i == kLearnFirst) monitor.Arm(*designer.Design(budget, 1.0));
    const ResidualReading reading = monitor.Observe(x, !alarm.active());
    if (!monitor.armed()) continue;
    const AlarmEdge edge =
        alarm.Update(static_cast<TimestampUs>(i) * kMicrosPerSecond, reading.ratio);
    if (edge == AlarmEdge::kRaise) ++result.raises;
    if (edge == AlarmEdge::kClear) monitor.ResetCharts();
  }
  result.expected = kBudgetPerDay * kSamples / kSecondsPerDay;
  return result;
}

// Tolerance: the budget is shared by three charts assuming their false alerts never
// coincide, so the achieved union rate lies below the budget; Poisson noise on ~500
// counts is ~4.5 %. We accept 0.35..1.15 of the budget (measured ~0.6-0.8; a chart
// designed from the wrong table or scale lands far outside).
constexpr double kLowest = 0.35;
constexpr double kHighest = 1.15;

TEST(ResidualMonitorTest, WhiteNoiseKeepsTheBudget) {
  // ARLs from the Brook & Evans / Lucas & Saccucci Markov chains (core/arl_design.h,
  // checked against references.md §1–§2); here the whole chain is checked end to end.
  const RateResult r = CountFalseAlarms(0.0, true, 101);
  EXPECT_GE(r.raises, kLowest * r.expected) << r.raises << " raises, budget " << r.expected;
  EXPECT_LE(r.raises, kHighest * r.expected) << r.raises << " raises, budget " << r.expected;
  RecordProperty("white_ratio", std::to_string(r.raises / r.expected));
}

TEST(ResidualMonitorTest, Ar1NoiseKeepsTheBudgetWithCorrection) {
  // DESIGN-NOTES §2 / references.md §7.3: positively autocorrelated residuals shorten
  // the real ARL0. With the AR(1) variance-inflation correction the budget holds.
  const RateResult corrected = CountFalseAlarms(0.5, true, 202);
  EXPECT_GE(corrected.raises, kLowest * corrected.expected)
      << corrected.raises << " raises, budget " << corrected.expected;
  EXPECT_LE(corrected.raises, kHighest * corrected.expected)
      << corrected.raises << " raises, budget " << corrected.expected;
  RecordProperty("ar1_ratio", std::to_string(corrected.raises / corrected.expected));
  // Without it the same noise blows through the budget.
  const RateResult uncorrected = CountFalseAlarms(0.5, false, 202);
  EXPECT_GT(uncorrected.raises, 3.0 * uncorrected.expected)
      << uncorrected.raises << " raises, budget " << uncorrected.expected;
}

TEST(ResidualMonitorTest, StandardisesWithTheLearntScale) {
  ResidualMonitor monitor(ResidualMonitorOptions{});
  std::mt19937_64 rng(5);
  std::normal_distribution<double> noise(0.0, 0.25);
  for (int i = 0; i < 20000; ++i) monitor.Observe(noise(rng), true);
  EXPECT_NEAR(monitor.sigma(), 0.25, 0.01);
  const ResidualReading r = monitor.Observe(1.0, false);
  EXPECT_NEAR(r.z, 4.0, 0.2);
  EXPECT_EQ(r.ratio, 0.0) << "not armed: no chart statistic";
}

TEST(ResidualMonitorTest, SustainedShiftSignalsAndSpikeSignalsOnSpikeChart) {
  ResidualMonitor monitor(ResidualMonitorOptions{});
  std::mt19937_64 rng(6);
  std::normal_distribution<double> noise(0.0, 1.0);
  for (int i = 0; i < 5000; ++i) monitor.Observe(noise(rng), true);
  ThresholdDesigner designer;
  monitor.Arm(*designer.Design(ThresholdOptions{}, 1.0));
  ResidualReading r;
  int samples = 0;
  // A 1.5-sigma shift: CUSUM territory (references.md §1.6: ARL(1 sigma) ~ 25 at h 12.7).
  while (samples < 200) {
    ++samples;
    r = monitor.Observe(1.5 + noise(rng), false);
    if (r.ratio >= 1.0) break;
  }
  EXPECT_LT(samples, 60);
  // CUSUM and EWMA are both built for sustained shifts; either may cross first.
  EXPECT_TRUE(r.detector == Detector::kCusum || r.detector == Detector::kEwma);
  monitor.ResetCharts();
  for (int i = 0; i < 300; ++i) monitor.Observe(noise(rng), false);  // back to steady state
  r = monitor.Observe(12.0, false);
  EXPECT_GE(r.ratio, 1.0);
  EXPECT_EQ(r.detector, Detector::kSpike);
}

// Heavy-tailed, slowly wandering residuals: what an online-trained model leaves on plant
// data (DESIGN-NOTES §2), and what the normal-theory ARL tables underestimate.
class WanderingResiduals {
 public:
  explicit WanderingResiduals(std::uint64_t seed) : rng_(seed) {}
  double Next() {
    bias_ = 0.995 * bias_ + 0.1 * normal_(rng_);  // stationary sd 1.0, memory ~200 samples
    return bias_ + tails_(rng_);                  // Student t, 3 degrees of freedom
  }

 private:
  std::mt19937_64 rng_;
  std::normal_distribution<double> normal_{0.0, 1.0};
  std::student_t_distribution<double> tails_{3.0};
  double bias_ = 0.0;
};

// Raises counted on `samples` residuals through the engine's default anomaly timing.
int CountRaises(ResidualMonitor& monitor, WanderingResiduals& source, int samples,
                double shift = 0.0) {
  Alarm alarm(
      AlarmTiming{.on_delay_s = 0.0, .off_delay_s = 30.0, .deadband = 0.2, .chatter_raises = 0});
  int raises = 0;
  for (int i = 0; i < samples; ++i) {
    const ResidualReading reading = monitor.Observe(source.Next() + shift, false);
    const AlarmEdge edge =
        alarm.Update(static_cast<TimestampUs>(i) * kMicrosPerSecond, reading.ratio);
    if (edge == AlarmEdge::kRaise) ++raises;
    if (edge == AlarmEdge::kClear) monitor.ResetCharts();
  }
  return raises;
}

TEST(ResidualMonitorTest, CoveringAKnownGoodRecordRaisesEachLimitByItsRecord) {
  ResidualMonitor monitor(ResidualMonitorOptions{});
  WanderingResiduals source(303);
  for (int i = 0; i < 5000; ++i) monitor.Observe(source.Next(), true);
  ThresholdDesigner designer;
  monitor.Arm(*designer.Design(ThresholdOptions{}, 1.0));
  const Thresholds designed = monitor.thresholds();
  for (int i = 0; i < 86'400; ++i) monitor.Observe(source.Next(), true);  // the good day

  const double cusum_record = monitor.cusum_record();
  const double ewma_record = monitor.ewma_record();
  const double spike_record = monitor.spike_record();
  // The day must have crossed what the tables promised, or there is nothing to test.
  ASSERT_GT(std::max({cusum_record, ewma_record, spike_record}), 1.0);
  ASSERT_TRUE(monitor.CoverInControlRecord());
  const auto expected = [](double record) {
    return std::clamp(ResidualMonitor::kSpikeTailMargin * record, 1.0,
                      ResidualMonitor::kMaxRecordRaise);
  };
  EXPECT_DOUBLE_EQ(monitor.thresholds().cusum_h, designed.cusum_h * expected(cusum_record));
  EXPECT_DOUBLE_EQ(monitor.thresholds().ewma_l, designed.ewma_l * expected(ewma_record));
  EXPECT_DOUBLE_EQ(monitor.thresholds().spike_limit, designed.spike_limit * expected(spike_record));
  EXPECT_EQ(monitor.cusum_record(), 0.0) << "a new record starts with the new limits";
}

TEST(ResidualMonitorTest, CoveredLimitsSpareNuisanceAlarmsAndStillSeeAShift) {
  ThresholdDesigner designer;
  ResidualMonitor covered(ResidualMonitorOptions{});
  ResidualMonitor tables_only(ResidualMonitorOptions{});
  for (ResidualMonitor* monitor : {&covered, &tables_only}) {
    WanderingResiduals learning(404);
    for (int i = 0; i < 5000; ++i) monitor->Observe(learning.Next(), true);
    monitor->Arm(*designer.Design(ThresholdOptions{}, 1.0));
    for (int i = 0; i < 86'400; ++i) monitor->Observe(learning.Next(), true);
  }
  ASSERT_TRUE(covered.CoverInControlRecord());

  // The next two days of the same process: fewer nuisance raises with covered limits.
  WanderingResiduals next_days_a(505);
  WanderingResiduals next_days_b(505);
  const int covered_raises = CountRaises(covered, next_days_a, 2 * 86'400);
  const int table_raises = CountRaises(tables_only, next_days_b, 2 * 86'400);
  EXPECT_LT(covered_raises, table_raises / 2)
      << covered_raises << " raises covered, " << table_raises << " with the tables alone";

  RecordProperty("nuisance_raises_covered", std::to_string(covered_raises));
  RecordProperty("nuisance_raises_tables", std::to_string(table_raises));

  // A sustained shift of 6 (about 3.4 residual sigmas here) is still raised within 30
  // samples: the raise is bounded (kMaxRecordRaise), so covering cannot blind the channel.
  covered.ResetCharts();
  WanderingResiduals shifted(606);
  EXPECT_GE(CountRaises(covered, shifted, 30, 6.0), 1);
}

TEST(ResidualMonitorTest, ARecordThatHeldAnUpsetRaisesALimitAtMostTwofold) {
  ResidualMonitor monitor(ResidualMonitorOptions{});
  std::mt19937_64 rng(7);
  std::normal_distribution<double> noise(0.0, 1.0);
  for (int i = 0; i < 5000; ++i) monitor.Observe(noise(rng), true);
  ThresholdDesigner designer;
  monitor.Arm(*designer.Design(ThresholdOptions{}, 1.0));
  const Thresholds designed = monitor.thresholds();
  for (int i = 0; i < 600; ++i) monitor.Observe(8.0 + noise(rng), true);  // a real upset
  // The chart's own sum stops at cusum_cap * h; the record's copy does not.
  EXPECT_GT(monitor.cusum_record(), ResidualMonitorOptions{}.cusum_cap);
  const double ewma_record = monitor.ewma_record();
  ASSERT_TRUE(monitor.CoverInControlRecord());
  EXPECT_DOUBLE_EQ(monitor.thresholds().cusum_h,
                   designed.cusum_h * ResidualMonitor::kMaxRecordRaise);
  EXPECT_DOUBLE_EQ(monitor.thresholds().ewma_l,
                   designed.ewma_l * std::min(ResidualMonitor::kSpikeTailMargin * ewma_record,
                                              ResidualMonitor::kMaxRecordRaise));
}

TEST(ResidualMonitorTest, CoveringDoesNothingBeforeArming) {
  ResidualMonitor monitor(ResidualMonitorOptions{});
  for (int i = 0; i < 1000; ++i) monitor.Observe(std::sin(i * 0.1), true);
  EXPECT_FALSE(monitor.CoverInControlRecord());
  EXPECT_FALSE(monitor.armed());
}

}  // namespace
}  // namespace nightjar::core
