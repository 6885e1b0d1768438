#include "core/cusum_detector.h"

#include <gtest/gtest.h>

#include <cmath>
#include <cstdint>
#include <limits>
#include <random>
#include <string>
#include <vector>

#include "support/allocation_counter.h"
#include "support/reference_data.h"

namespace nightjar::core {
namespace {

using nightjar::testing::LoadReference;
using nightjar::testing::ToVector;

// Reference: NIST/SEMATECH e-Handbook 6.3.2.3 via
// ../shared/references/cusum_vectors.json worked_examples.nist_6_3_2_3 (references.md
// 1.4): target 325, k = 0.3175, h = 4.1959 in data units (sigma 1 here). S_hi first
// exceeds h at group 14 and stays above through group 20.
TEST(CusumDetectorTest, NistHandbookExample) {
  const nlohmann::json ref = LoadReference("cusum_vectors.json");
  ASSERT_FALSE(ref.is_null());
  const nlohmann::json& ex = ref["worked_examples"]["nist_6_3_2_3"];
  const std::vector<double> data = ToVector(ex["data"]);
  const std::vector<double> s_hi = ToVector(ex["s_hi"]);
  const std::vector<double> s_lo = ToVector(ex["s_lo"]);
  const nlohmann::json& printed = ex["printed_2dp"];  // rows (x-325, S_hi, S_lo, cumsum)
  ASSERT_EQ(data.size(), 20u);
  CusumDetector chart(ex["k"].get<double>(), ex["h"].get<double>(), ex["target"].get<double>(),
                      1.0);
  int first_signal = 0;
  for (std::size_t i = 0; i < data.size(); ++i) {
    SCOPED_TRACE("group " + std::to_string(i + 1));
    const CusumDetector::Reading r = chart.Add(data[i]);
    EXPECT_NEAR(r.upper, s_hi[i], 1e-6);  // recomputed, stored to 6 dp
    EXPECT_NEAR(r.lower, s_lo[i], 1e-6);
    // The page's printed 2-dp columns (max rounding difference 0.005, references.md 1.4).
    EXPECT_NEAR(r.upper, printed[i][1].get<double>(), 0.005 + 1e-9);
    EXPECT_NEAR(r.lower, printed[i][2].get<double>(), 0.005 + 1e-9);
    EXPECT_FALSE(r.lower_signal);
    if (r.upper_signal && first_signal == 0) first_signal = static_cast<int>(i) + 1;
    if (first_signal != 0) {
      EXPECT_TRUE(r.signal);  // stays above through group 20
    }
  }
  EXPECT_EQ(first_signal, ex["first_signal_hi_1based"].get<int>());
  EXPECT_EQ(first_signal, 14);
  EXPECT_NEAR(chart.reading().upper, 19.035, 0.0005);  // S_hi,20 (references.md 1.4)
}

// Reference: Montgomery, Introduction to SQC 6th ed., Example 9.1 (Table 9.1 data,
// mu0 = 10, sigma = 1, K = 0.5, H = 5), recomputed in
// ../shared/references/cusum_vectors.json worked_examples.montgomery_ex_9_1
// (references.md 1.5; book result from memory matches): first signal at period 29 with
// C+ = 5.28, N+ = 7, new mean 10 + 0.5 + 5.28/7 = 11.2543.
TEST(CusumDetectorTest, MontgomeryExample91) {
  const nlohmann::json ref = LoadReference("cusum_vectors.json");
  ASSERT_FALSE(ref.is_null());
  const nlohmann::json& ex = ref["worked_examples"]["montgomery_ex_9_1"];
  const std::vector<double> data = ToVector(ex["data"]);
  const std::vector<double> c_plus = ToVector(ex["c_plus"]);
  const std::vector<double> c_minus = ToVector(ex["c_minus"]);
  const std::vector<double> n_plus = ToVector(ex["n_plus"]);
  const std::vector<double> n_minus = ToVector(ex["n_minus"]);
  ASSERT_EQ(data.size(), 30u);
  const double sigma = ex["sigma"].get<double>();
  CusumDetector chart(ex["K"].get<double>() / sigma, ex["H"].get<double>() / sigma,
                      ex["mu0"].get<double>(), sigma);
  int first_signal = 0;
  CusumDetector::Reading at_signal;
  double shift_at_signal = 0.0;
  for (std::size_t i = 0; i < data.size(); ++i) {
    SCOPED_TRACE("period " + std::to_string(i + 1));
    const CusumDetector::Reading r = chart.Add(data[i]);
    EXPECT_NEAR(r.upper, c_plus[i], 1e-6);
    EXPECT_NEAR(r.lower, c_minus[i], 1e-6);
    EXPECT_EQ(r.upper_run, static_cast<std::int64_t>(n_plus[i]));
    EXPECT_EQ(r.lower_run, static_cast<std::int64_t>(n_minus[i]));
    EXPECT_DOUBLE_EQ(r.ratio, std::max(r.upper, r.lower) / 5.0);
    if (r.signal && first_signal == 0) {
      first_signal = static_cast<int>(i) + 1;
      at_signal = r;
      shift_at_signal = chart.ShiftEstimate();
    }
  }
  EXPECT_EQ(first_signal, ex["first_signal_plus_1based"].get<int>());
  EXPECT_EQ(first_signal, 29);
  EXPECT_TRUE(at_signal.upper_signal);
  EXPECT_NEAR(at_signal.upper, ex["c_plus_at_signal"].get<double>(), 5e-5);
  EXPECT_NEAR(at_signal.upper, 5.28, 0.005);
  EXPECT_EQ(at_signal.upper_run, ex["n_plus_at_signal"].get<std::int64_t>());
  EXPECT_EQ(at_signal.upper_run, 7);
  EXPECT_NEAR(shift_at_signal, ex["mu_hat_after_shift"].get<double>(), 5e-5);
  EXPECT_NEAR(shift_at_signal, 11.2543, 1e-4);
}

TEST(CusumDetectorTest, LowerSideAndShiftEstimate) {
  // Mean 2 below target, sigma 1, k = 0.5: C- grows by 1.5 per sample (by hand).
  CusumDetector chart(0.5, 4.0, 0.0, 1.0);
  EXPECT_EQ(chart.ratio(), 0.0);
  EXPECT_EQ(chart.ShiftEstimate(), 0.0);  // no run: the target
  CusumDetector::Reading r;
  for (int i = 0; i < 3; ++i) r = chart.Add(-2.0);
  EXPECT_DOUBLE_EQ(r.lower, 4.5);
  EXPECT_EQ(r.lower_run, 3);
  EXPECT_TRUE(r.lower_signal);
  EXPECT_FALSE(r.upper_signal);
  EXPECT_DOUBLE_EQ(chart.ShiftEstimate(), -2.0);  // 0 - 0.5 - 4.5 / 3
  chart.Reset();
  EXPECT_EQ(chart.reading().lower, 0.0);
  EXPECT_EQ(chart.reading().lower_run, 0);
}

// Why the cap exists (header): after a long fault the uncapped statistic needs time
// proportional to the fault's length to clear; the capped one clears within about
// (max_ratio - 1) h / k samples. Deterministic inputs, so the counts are exact.
TEST(CusumDetectorTest, CapBoundsClearingTimeAfterLongFault) {
  const auto samples_to_clear = [](CusumDetector chart, int fault_samples) {
    for (int i = 0; i < fault_samples; ++i) chart.Add(2.0);  // 2-sigma fault
    EXPECT_TRUE(chart.reading().signal);
    const double during = chart.ShiftEstimate();
    EXPECT_NEAR(during, 2.0, 1e-9);  // run sum is uncapped: the estimate is unbiased
    int n = 0;
    while (chart.Add(0.0).signal) ++n;  // fault over, back on target
    return n + 1;
  };
  CusumDetector plain(0.5, 5.0);
  CusumDetector capped(0.5, 5.0);
  ASSERT_TRUE(capped.set_cap(2.0).ok());
  // Uncapped: C+ = 1.5 * 3600 = 5400 after an hour at 1 Hz, falls 0.5 per sample.
  EXPECT_EQ(samples_to_clear(plain, 3600), 10791);  // (5400 - 5) / 0.5 + 1
  // Capped at 2 H = 10: (10 - 5) / 0.5 + 1 = 11, however long the fault.
  EXPECT_EQ(samples_to_clear(capped, 3600), 11);
  EXPECT_EQ(samples_to_clear(capped, 36000), 11);

  CusumDetector c(0.5, 5.0);
  ASSERT_TRUE(c.set_cap(2.0).ok());
  for (int i = 0; i < 100; ++i) c.Add(3.0);
  EXPECT_DOUBLE_EQ(c.reading().upper, 10.0);
  EXPECT_DOUBLE_EQ(c.ratio(), 2.0);
  EXPECT_DOUBLE_EQ(c.ShiftEstimate(), 3.0);
  EXPECT_EQ(c.set_cap(0.5).code(), StatusCode::kInvalidArgument);
  EXPECT_EQ(c.cap(), 2.0);
  EXPECT_TRUE(c.set_cap(std::numeric_limits<double>::infinity()).ok());
}

TEST(CusumDetectorTest, CapDoesNotChangeFirstSignal) {
  std::mt19937_64 rng(3);
  std::normal_distribution<double> normal(0.7, 1.0);
  CusumDetector plain(0.5, 5.0);
  CusumDetector capped(0.5, 5.0);
  ASSERT_TRUE(capped.set_cap(1.0).ok());
  for (int i = 0; i < 5000; ++i) {
    const double x = normal(rng);
    const bool a = plain.Add(x).signal;
    const bool b = capped.Add(x).signal;
    ASSERT_EQ(a, b) << "sample " << i;
    if (a) break;
  }
}

TEST(CusumDetectorTest, SetSigmaKeepsRatio) {
  CusumDetector chart(0.5, 4.0, 10.0, 2.0);
  EXPECT_DOUBLE_EQ(chart.reference_value(), 1.0);
  EXPECT_DOUBLE_EQ(chart.decision_interval(), 8.0);
  chart.Add(14.0);  // C+ = 4 - 1 = 3
  EXPECT_DOUBLE_EQ(chart.ratio(), 3.0 / 8.0);
  const double estimate = chart.ShiftEstimate();  // 10 + 1 + 3 = 14
  EXPECT_DOUBLE_EQ(estimate, 14.0);
  ASSERT_TRUE(chart.set_sigma(4.0).ok());
  EXPECT_DOUBLE_EQ(chart.ratio(), 3.0 / 8.0);
  EXPECT_DOUBLE_EQ(chart.reading().upper, 6.0);
  EXPECT_DOUBLE_EQ(chart.ShiftEstimate(), 10.0 + 2.0 + 6.0);  // in the new scale
  EXPECT_EQ(chart.set_sigma(-1.0).code(), StatusCode::kInvalidArgument);
}

TEST(CusumDetectorTest, IgnoresNonFiniteSamplesAndValidates) {
  CusumDetector chart(0.5, 4.0);
  chart.Add(1.0);
  const CusumDetector::Reading r = chart.Add(std::numeric_limits<double>::quiet_NaN());
  EXPECT_DOUBLE_EQ(r.upper, 0.5);
  EXPECT_EQ(r.upper_run, 1);

  EXPECT_TRUE(CusumDetector::Validate(0.0, 4.0, 0.0, 1.0).ok());
  const double nan = std::numeric_limits<double>::quiet_NaN();
  struct Case {
    double k, h, target, sigma;
    const char* name;
  };
  const std::vector<Case> bad = {{-0.1, 4, 0, 1, "k"},       {nan, 4, 0, 1, "k"},
                                 {0.5, 0, 0, 1, "h"},        {0.5, nan, 0, 1, "h"},
                                 {0.5, 4, nan, 1, "target"}, {0.5, 4, 0, 0, "sigma"}};
  for (const auto& b : bad) {
    const Status s = CusumDetector::Validate(b.k, b.h, b.target, b.sigma);
    EXPECT_EQ(s.code(), StatusCode::kInvalidArgument) << b.name;
    EXPECT_NE(s.message().find(std::string("cusum ") + b.name), std::string::npos) << s.message();
  }
}

TEST(CusumDetectorTest, AddNeverAllocates) {
  CusumDetector chart(0.5, 5.0);
  ASSERT_TRUE(chart.set_cap(3.0).ok());
  nightjar::testing::AllocationCounter counter;
  bool any = false;
  for (int i = 0; i < 1000; ++i) any |= chart.Add(i % 7 == 0 ? 3.0 : 0.2).signal;
  EXPECT_EQ(counter.count(), 0u);
  EXPECT_TRUE(any);
}

}  // namespace
}  // namespace nightjar::core
