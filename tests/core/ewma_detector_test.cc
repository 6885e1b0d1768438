#include "core/ewma_detector.h"

#include <gtest/gtest.h>

#include <cmath>
#include <limits>
#include <string>
#include <vector>

#include "support/allocation_counter.h"
#include "support/reference_data.h"

namespace nightjar::core {
namespace {

using nightjar::testing::LoadReference;
using nightjar::testing::ToVector;

// Reference: NIST/SEMATECH e-Handbook 6.3.2.4 via
// ../shared/references/ewma_vectors.json worked_examples.nist_6_3_2_4 (references.md
// 2.2): EWMA_0 = 50, s = 2.0539, lambda = 0.3, k = 3, asymptotic limits.
TEST(EwmaDetectorTest, NistHandbookExample) {
  const nlohmann::json ref = LoadReference("ewma_vectors.json");
  ASSERT_FALSE(ref.is_null());
  const nlohmann::json& ex = ref["worked_examples"]["nist_6_3_2_4"];
  const std::vector<double> data = ToVector(ex["data"]);
  const std::vector<double> ewma = ToVector(ex["ewma"]);
  const std::vector<double> printed = ToVector(ex["printed_2dp"]);
  ASSERT_EQ(data.size(), 20u);
  ASSERT_EQ(ewma.size(), data.size());
  EwmaDetector chart(ex["lambda"].get<double>(), ex["k"].get<double>(), ex["z0"].get<double>(),
                     ex["s"].get<double>(), /*exact_limits=*/false);
  for (std::size_t i = 0; i < data.size(); ++i) {
    SCOPED_TRACE("observation " + std::to_string(i + 1));
    const EwmaDetector::Reading r = chart.Add(data[i]);
    EXPECT_NEAR(r.statistic, ewma[i], 1e-9);      // recomputed, stored to 10 dp
    EXPECT_NEAR(r.statistic, printed[i], 0.005);  // the page's 2-dp column
    // The page's limits (printed UCL 52.5884, LCL 47.4115; the LCL uses the rounded
    // factor 0.4201, hence 1e-4).
    EXPECT_NEAR(r.upper_limit, ex["printed_ucl"].get<double>(), 1e-4);
    EXPECT_NEAR(r.lower_limit, ex["printed_lcl"].get<double>(), 1e-4);
    EXPECT_NEAR(r.upper_limit, ex["ucl_unrounded"].get<double>(), 1e-6);
    EXPECT_NEAR(r.lower_limit, ex["lcl_unrounded"].get<double>(), 1e-6);
    EXPECT_FALSE(r.signal);  // the page: no point outside the limits
    EXPECT_LT(r.ratio, 1.0);
  }
}

// Reference: Montgomery, Introduction to SQC 6th ed., Example 9.2 (Table 9.1 data,
// lambda = 0.1, L = 2.7, mu0 = 10, sigma = 1, exact limits), recomputed in
// ../shared/references/ewma_vectors.json worked_examples.montgomery_ex_9_2 (references.md
// 2.3; the book's own conclusion is unverified there, so the recomputed rows are the
// check): z_1 = 9.945, UCL_1 = 10.27 = 10 + 2.7 * 0.1, first signal at period 29.
TEST(EwmaDetectorTest, MontgomeryExample92ExactLimits) {
  const nlohmann::json ref = LoadReference("ewma_vectors.json");
  ASSERT_FALSE(ref.is_null());
  const nlohmann::json& ex = ref["worked_examples"]["montgomery_ex_9_2"];
  const std::vector<double> data = ToVector(ex["data"]);
  const nlohmann::json& rows = ex["rows"];
  ASSERT_EQ(rows.size(), data.size());
  EwmaDetector chart(ex["lambda"].get<double>(), ex["L"].get<double>(), ex["mu0"].get<double>(),
                     ex["sigma"].get<double>());
  int first_signal = 0;
  for (std::size_t i = 0; i < data.size(); ++i) {
    SCOPED_TRACE("period " + std::to_string(i + 1));
    const EwmaDetector::Reading r = chart.Add(data[i]);
    EXPECT_NEAR(r.statistic, rows[i]["z"].get<double>(), 1e-6);  // stored to 6 dp
    EXPECT_NEAR(r.upper_limit, rows[i]["ucl"].get<double>(), 1e-6);
    EXPECT_NEAR(r.lower_limit, rows[i]["lcl"].get<double>(), 1e-6);
    EXPECT_EQ(r.ratio, chart.ratio());
    if (r.signal && first_signal == 0) first_signal = static_cast<int>(i) + 1;
  }
  EXPECT_EQ(first_signal, ex["first_signal_1based"].get<int>());
  EXPECT_EQ(first_signal, 29);
  // references.md 2.3: UCL_1 = 10.2700, steady state UCL = 10.6194.
  EwmaDetector fresh(0.1, 2.7, 10.0, 1.0);
  EXPECT_NEAR(fresh.Add(10.0).upper_limit, 10.27, 1e-12);
  EXPECT_NEAR(10.0 + fresh.asymptotic_half_width(), 10.6194, 1e-4);
}

// z_28 = 10.5731 is inside and z_29 = 10.6468 is outside (references.md 2.3), so the
// ratio crosses 1 exactly there; the ratio is |z - target| / half-width.
TEST(EwmaDetectorTest, RatioIsDistanceOverHalfWidth) {
  const nlohmann::json ref = LoadReference("ewma_vectors.json");
  ASSERT_FALSE(ref.is_null());
  const std::vector<double> data = ToVector(ref["worked_examples"]["montgomery_ex_9_2"]["data"]);
  EwmaDetector chart(0.1, 2.7, 10.0, 1.0);
  EXPECT_EQ(chart.ratio(), 0.0);  // before the first sample
  double ratio_28 = 0.0, ratio_29 = 0.0;
  for (std::size_t i = 0; i < 29; ++i) {
    const EwmaDetector::Reading r = chart.Add(data[i]);
    EXPECT_NEAR(r.ratio, std::abs(r.statistic - 10.0) / chart.half_width(), 1e-15);
    EXPECT_EQ(r.signal, r.ratio >= 1.0);
    if (i == 27) ratio_28 = r.ratio;
    if (i == 28) ratio_29 = r.ratio;
  }
  EXPECT_LT(ratio_28, 1.0);
  EXPECT_GE(ratio_29, 1.0);
  // By hand from the rows: (10.646823 - 10) / 0.618735.
  EXPECT_NEAR(ratio_29, 0.646823 / 0.618735, 1e-5);
}

TEST(EwmaDetectorTest, ExactLimitsApproachAsymptoticOnes) {
  EwmaDetector exact(0.2, 3.0, 0.0, 2.0, true);
  EwmaDetector asymptotic(0.2, 3.0, 0.0, 2.0, false);
  double previous = 0.0;
  for (int t = 1; t <= 200; ++t) {
    const double w = exact.Add(0.0).upper_limit;
    asymptotic.Add(0.0);
    // Variance formula sigma^2 lambda/(2-lambda) [1 - (1-lambda)^(2t)] (references.md 2).
    const double want = 3.0 * 2.0 * std::sqrt(0.2 / 1.8 * (1.0 - std::pow(0.8, 2.0 * t)));
    EXPECT_NEAR(w, want, 1e-12) << "t " << t;
    EXPECT_GE(w, previous);
    if (t <= 50) {
      EXPECT_GT(w, previous);  // later the widths agree to the last bit
    }
    previous = w;
  }
  EXPECT_NEAR(exact.half_width(), asymptotic.half_width(), 1e-15);
  EXPECT_NEAR(asymptotic.half_width(), 3.0 * 2.0 * std::sqrt(0.2 / 1.8), 1e-15);
}

TEST(EwmaDetectorTest, SigmaTargetResetAndReseat) {
  EwmaDetector chart(0.5, 3.0, 1.0, 1.0);
  chart.Add(3.0);
  chart.Add(3.0);  // z = 1 + 2 * 0.75 = 2.5
  EXPECT_DOUBLE_EQ(chart.statistic(), 2.5);
  const double ratio = chart.ratio();
  ASSERT_TRUE(chart.set_sigma(2.0).ok());
  EXPECT_DOUBLE_EQ(chart.statistic(), 2.5);      // z kept
  EXPECT_DOUBLE_EQ(chart.ratio(), ratio / 2.0);  // limits twice as wide
  EXPECT_EQ(chart.set_sigma(0.0).code(), StatusCode::kInvalidArgument);
  EXPECT_EQ(chart.sigma(), 2.0);  // unchanged by the failed call

  const double width = chart.half_width();
  chart.Reseat();
  EXPECT_EQ(chart.statistic(), 1.0);
  EXPECT_EQ(chart.count(), 2);
  EXPECT_EQ(chart.half_width(), width);  // clock kept: limits keep their width

  chart.Reset();
  EXPECT_EQ(chart.statistic(), 1.0);
  EXPECT_EQ(chart.count(), 0);
  EXPECT_EQ(chart.half_width(), 0.0);
  EXPECT_NEAR(chart.Add(1.0).upper_limit, 1.0 + 3.0 * 2.0 * 0.5, 1e-15);  // L sigma lambda

  ASSERT_TRUE(chart.set_target(-4.0).ok());
  EXPECT_EQ(chart.statistic(), -4.0);
  EXPECT_EQ(chart.count(), 0);
  EXPECT_EQ(chart.set_target(std::numeric_limits<double>::infinity()).code(),
            StatusCode::kInvalidArgument);
}

TEST(EwmaDetectorTest, IgnoresNonFiniteSamples) {
  EwmaDetector chart(0.3, 3.0);
  chart.Add(1.0);
  const EwmaDetector::Reading before = chart.reading();
  const EwmaDetector::Reading r = chart.Add(std::numeric_limits<double>::quiet_NaN());
  EXPECT_EQ(r.statistic, before.statistic);
  EXPECT_EQ(r.upper_limit, before.upper_limit);
  EXPECT_EQ(chart.count(), 1);
}

TEST(EwmaDetectorTest, ValidateNamesTheParameter) {
  EXPECT_TRUE(EwmaDetector::Validate(0.1, 3.0, 0.0, 1.0).ok());
  EXPECT_TRUE(EwmaDetector::Validate(1.0, 3.0, 0.0, 1.0).ok());
  const double nan = std::numeric_limits<double>::quiet_NaN();
  struct Case {
    double lambda, l, target, sigma;
    const char* name;
  };
  const std::vector<Case> bad = {{0.0, 3, 0, 1, "lambda"},        {1.1, 3, 0, 1, "lambda"},
                                 {nan, 3, 0, 1, "lambda"},        {0.1, 0, 0, 1, "limit_factor"},
                                 {0.1, -1, 0, 1, "limit_factor"}, {0.1, 3, nan, 1, "target"},
                                 {0.1, 3, 0, 0, "sigma"},         {0.1, 3, 0, -2, "sigma"}};
  for (const auto& b : bad) {
    const Status s = EwmaDetector::Validate(b.lambda, b.l, b.target, b.sigma);
    EXPECT_EQ(s.code(), StatusCode::kInvalidArgument) << b.name;
    EXPECT_NE(s.message().find(b.name), std::string::npos) << s.message();
  }
}

TEST(EwmaDetectorTest, AddNeverAllocates) {
  EwmaDetector chart(0.1, 2.7, 10.0, 1.0);
  nightjar::testing::AllocationCounter counter;
  bool any = false;
  for (int i = 0; i < 1000; ++i) any |= chart.Add(10.0 + 0.001 * i).signal;
  EXPECT_EQ(counter.count(), 0u);
  EXPECT_TRUE(any);  // a 0 .. 1 sigma ramp ends far outside the limits
}

}  // namespace
}  // namespace nightjar::core
