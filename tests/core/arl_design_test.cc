#include "core/arl_design.h"

#include <gtest/gtest.h>

#include <array>
#include <cmath>
#include <cstdint>
#include <cstdio>
#include <limits>
#include <random>
#include <string>
#include <vector>

#include "core/cusum_detector.h"
#include "core/ewma_detector.h"
#include "core/running_moments.h"
#include "support/reference_data.h"

namespace nightjar::core {
namespace {

using nightjar::testing::LoadReference;

double RelErr(double got, double want) { return std::abs(got - want) / std::abs(want); }

// One unit in the last printed digit of a 3-significant-figure table entry.
double ThreeFigureUnit(double v) { return std::pow(10.0, std::floor(std::log10(v)) - 2.0); }

// Lucas & Saccucci print integers from 100 up and one decimal below.
double LucasSaccucciUnit(double v) { return v >= 100.0 ? 1.0 : 0.1; }

// ---- Tabulated ARLs -------------------------------------------------------------

// Reference: ../shared/references/cusum_vectors.json arl (references.md 1.1): k = 0.5,
// h = 4 and 5, ten shifts. Published: Montgomery 6th ed. Table 9.3 (from memory; all 20
// reproduced there). Integral equation: 96-node Nystrom solution (computed). Brook &
// Evans with 400 states (computed by the reference's dense solve). Monte Carlo of the
// actual two-sided scheme (computed, with its standard error).
TEST(ArlDesignTest, CusumArlTable) {
  const nlohmann::json ref = LoadReference("cusum_vectors.json");
  ASSERT_FALSE(ref.is_null());
  ASSERT_EQ(ref["arl"].size(), 20u);
  for (const nlohmann::json& row : ref["arl"]) {
    const double k = row["k"].get<double>();
    const double h = row["h"].get<double>();
    const double shift = row["shift_sigma"].get<double>();
    SCOPED_TRACE("h " + std::to_string(h) + " shift " + std::to_string(shift));
    const double two_sided = CusumTwoSidedArl(k, h, shift);
    const double integral = row["two_sided_integral_eq"].get<double>();
    // Suggested tolerance (references.md 1.1): 0.5 % against the integral equation.
    EXPECT_LT(RelErr(two_sided, integral), 0.005);
    // Our extrapolated chain is far closer than that; 1e-4 still covers the 4-dp
    // rounding of the stored values (computed cross-check).
    EXPECT_LT(RelErr(two_sided, integral), 1e-4) << two_sided << " vs " << integral;
    EXPECT_LT(
        RelErr(CusumOneSidedArl(k, h, shift), row["one_sided_upper_integral_eq"].get<double>()),
        1e-4);
    // Published table: within one unit of the last printed digit.
    const double published = row["published_montgomery_t9_3"].get<double>();
    EXPECT_NEAR(two_sided, published, ThreeFigureUnit(published) + 1e-9);
    // The raw 400-state chain must equal the reference's dense-solve chain (our
    // Levinson solve differs only by rounding; the stored values have 4 dp).
    const double up400 = CusumOneSidedArlMarkovChain(k, h, shift, 400);
    const double down400 = CusumOneSidedArlMarkovChain(k, h, -shift, 400);
    const double chain400 = 1.0 / (1.0 / up400 + 1.0 / down400);
    EXPECT_NEAR(chain400, row["two_sided_markov_m400"].get<double>(), 6e-5 + 1e-9 * chain400);
    // Simulation of the real two-sided scheme (checks 1/ARL = 1/ARL+ + 1/ARL-).
    const double mc = row["two_sided_monte_carlo"]["mean"].get<double>();
    const double se = row["two_sided_monte_carlo"]["se"].get<double>();
    EXPECT_NEAR(two_sided, mc, 4.0 * se + 1e-3);
    // Siegmund column, recomputed from the closed form (3 dp stored).
    EXPECT_NEAR(SiegmundTwoSidedArl(k, h, shift), row["two_sided_siegmund"].get<double>(),
                6e-4 + 1e-9 * two_sided);
  }
}

// Reference: ../shared/references/ewma_vectors.json arl (references.md 2.1): Lucas &
// Saccucci (1990) Table 3 via Montgomery Table 9.11 (from memory; 48/50 at the printed
// rounding, two one unit off), the integral equation with 200 nodes (computed), the
// 301-state Lucas-Saccucci chain (computed) and Monte Carlo (computed, with SE).
TEST(ArlDesignTest, EwmaArlTable) {
  const nlohmann::json ref = LoadReference("ewma_vectors.json");
  ASSERT_FALSE(ref.is_null());
  ASSERT_EQ(ref["arl"].size(), 53u);
  for (const nlohmann::json& row : ref["arl"]) {
    const double lambda = row["lambda"].get<double>();
    const double limit = row["L"].get<double>();
    const double shift = row["shift_sigma"].get<double>();
    SCOPED_TRACE("lambda " + std::to_string(lambda) + " L " + std::to_string(limit) + " shift " +
                 std::to_string(shift));
    const double arl = EwmaTwoSidedArl(lambda, limit, shift);
    const double integral = row["integral_eq"].get<double>();
    // Suggested tolerance (references.md 2.1): 1 % against the integral equation.
    EXPECT_LT(RelErr(arl, integral), 0.01);
    // Computed cross-check: 2e-4 relative plus the 3-dp rounding of the stored values.
    EXPECT_NEAR(arl, integral, 5e-4 + 2e-4 * integral);
    const double published = row["published_lucas_saccucci"].get<double>();
    EXPECT_NEAR(arl, published, LucasSaccucciUnit(published) + 1e-9);
    if (row.contains("markov_m150")) {
      EXPECT_NEAR(EwmaTwoSidedArlMarkovChain(lambda, limit, shift, 301),
                  row["markov_m150"].get<double>(), 5e-4 + 1e-8 * arl);
    }
    if (row.contains("monte_carlo")) {
      EXPECT_NEAR(arl, row["monte_carlo"]["mean"].get<double>(),
                  4.0 * row["monte_carlo"]["se"].get<double>() + 1e-3);
    }
  }
}

// Lambda = 1 is the Shewhart chart: a geometric run length with signal probability
// 2 (1 - Phi(L)) (common practice; references.md 2.1 uses it for L = 3.0902). The dense
// chain solve loses about eps * ARL to cancellation (5e-8 at L = 6, ARL 5e8).
TEST(ArlDesignTest, EwmaWithLambdaOneIsShewhart) {
  for (double limit : {1.0, 2.0, 3.0902, 4.5, 6.0}) {
    const double p = std::erfc(limit / std::sqrt(2.0));  // 2 (1 - Phi(L))
    const double tol = std::max(1e-10, 1e-15 / p);
    EXPECT_LT(RelErr(EwmaTwoSidedArl(1.0, limit, 0.0), 1.0 / p), tol) << limit;
    const double p1 = 0.5 * std::erfc((limit - 1.0) / std::sqrt(2.0)) +
                      0.5 * std::erfc((limit + 1.0) / std::sqrt(2.0));
    EXPECT_LT(RelErr(EwmaTwoSidedArl(1.0, limit, 1.0), 1.0 / p1), 1e-9) << limit;
  }
}

// The ARL functions are symmetric in the shift (two-sided charts) and decrease with it.
TEST(ArlDesignTest, ArlsAreSymmetricAndMonotone) {
  double previous_cusum = std::numeric_limits<double>::infinity();
  double previous_ewma = std::numeric_limits<double>::infinity();
  for (double shift : {0.0, 0.1, 0.5, 1.0, 2.0, 3.0}) {
    const double c = CusumTwoSidedArl(0.5, 6.0, shift);
    const double e = EwmaTwoSidedArl(0.15, 3.2, shift);
    EXPECT_LT(RelErr(CusumTwoSidedArl(0.5, 6.0, -shift), c), 1e-12);
    EXPECT_LT(RelErr(EwmaTwoSidedArl(0.15, 3.2, -shift), e), 1e-9);
    EXPECT_LT(c, previous_cusum);
    EXPECT_LT(e, previous_ewma);
    previous_cusum = c;
    previous_ewma = e;
  }
  // The folded (shift 0) and full EWMA chains agree as the shift goes to 0.
  EXPECT_LT(RelErr(EwmaTwoSidedArl(0.15, 3.2, 1e-9), EwmaTwoSidedArl(0.15, 3.2, 0.0)), 1e-7);
  // h = 0: the first sample signals iff |x| > k (geometric).
  EXPECT_LT(RelErr(CusumOneSidedArl(0.5, 0.0, 0.0), 1.0 / (0.5 * std::erfc(0.5 / std::sqrt(2.0)))),
            1e-12);
}

// ---- Siegmund -----------------------------------------------------------------

// Reference: Siegmund (1985) as presented in Montgomery 9.1.4 (from memory), worked
// value recomputed in cusum_vectors.json siegmund_example: 938.22 / 469.11
// (references.md 1.2). b = h + 1.166 = 6.166, D = -0.5.
TEST(ArlDesignTest, SiegmundWorkedValue) {
  const nlohmann::json ref = LoadReference("cusum_vectors.json");
  ASSERT_FALSE(ref.is_null());
  const nlohmann::json& ex = ref["siegmund_example"];
  EXPECT_NEAR(SiegmundOneSidedArl(0.5, 5.0, 0.0), ex["one_sided"].get<double>(), 0.005);
  EXPECT_NEAR(SiegmundTwoSidedArl(0.5, 5.0, 0.0), ex["two_sided"].get<double>(), 0.005);
  EXPECT_NEAR(SiegmundOneSidedArl(0.5, 5.0, 0.0), 938.22, 0.005);
  EXPECT_NEAR(SiegmundTwoSidedArl(0.5, 5.0, 0.0), 469.11, 0.005);
  // D = 0: b^2 exactly. Near D = 0 the closed form cancels; the series used there must
  // agree with the closed form evaluated in long double (computed).
  EXPECT_DOUBLE_EQ(SiegmundOneSidedArl(0.5, 5.0, 0.5), 6.166 * 6.166);
  for (long double d : {-6e-5L, -1e-6L, 1e-7L, 3e-5L, 8e-5L}) {
    const long double b = 6.166L;
    const long double u = 2.0L * d * b;
    const long double closed = (std::expm1(-u) + u) / (2.0L * d * d);
    const double got = SiegmundOneSidedArl(0.0, 5.0, static_cast<double>(d));  // D = d
    EXPECT_LT(std::abs(static_cast<long double>(got) - closed) / closed, 1e-9L)
        << static_cast<double>(d);
  }
}

// ---- Design -----------------------------------------------------------------------

// Reference: Hawkins (1993) (k, h) pairs for two-sided ARL0 ~ 370, via Montgomery Table
// 9.4 (from memory), in cusum_vectors.json hawkins_arl0_370; references.md 1.3: their
// ARL0 by the integral equation (2 dp stored) and "consistent within +-0.006 in h"; the
// exact h for 370 is 8.008 / 4.774 / 3.339 / 2.516 / 1.986 / 1.604 (computed there).
TEST(ArlDesignTest, HawkinsPairs) {
  const nlohmann::json ref = LoadReference("cusum_vectors.json");
  ASSERT_FALSE(ref.is_null());
  const std::array<double, 6> exact_h = {8.008, 4.774, 3.339, 2.516, 1.986, 1.604};
  ASSERT_EQ(ref["hawkins_arl0_370"].size(), 6u);
  for (std::size_t i = 0; i < 6; ++i) {
    const nlohmann::json& row = ref["hawkins_arl0_370"][i];
    const double k = row["k"].get<double>();
    const double h = row["h"].get<double>();
    SCOPED_TRACE("k " + std::to_string(k));
    EXPECT_NEAR(CusumTwoSidedArl(k, h, 0.0), row["two_sided_arl0"].get<double>(), 0.006);
    const Result<double> designed = CusumThresholdForArl(k, 370.0);
    ASSERT_TRUE(designed.ok()) << designed.status().message();
    EXPECT_NEAR(*designed, h, 0.006);
    EXPECT_NEAR(*designed, exact_h[i], 6e-4);
  }
}

// Reference: cusum_vectors.json design_high_arl0 (references.md 1.6, computed by the
// integral equation): k = 0.5, ARL0 1e4 / 1e5 / 1e6 -> h = 8.053 / 10.355 / 12.657,
// ARL at 1 sigma 16.478 / 21.081 / 25.686.
TEST(ArlDesignTest, CusumHighArl0Designs) {
  const nlohmann::json ref = LoadReference("cusum_vectors.json");
  ASSERT_FALSE(ref.is_null());
  ASSERT_EQ(ref["design_high_arl0"].size(), 3u);
  for (const nlohmann::json& row : ref["design_high_arl0"]) {
    const double arl0 = row["arl0_two_sided"].get<double>();
    SCOPED_TRACE("arl0 " + std::to_string(arl0));
    const Result<double> h = CusumThresholdForArl(row["k"].get<double>(), arl0);
    ASSERT_TRUE(h.ok()) << h.status().message();
    EXPECT_NEAR(*h, row["h"].get<double>(), 5e-4);
    EXPECT_LT(RelErr(CusumTwoSidedArl(0.5, *h, 1.0), row["arl_shift1"].get<double>()), 1e-3);
  }
  // references.md 7.3 (computed): ARL0 6e5 needs h = 12.146 at k = 0.5.
  const Result<double> h6 = CusumThresholdForArl(0.5, 6e5);
  ASSERT_TRUE(h6.ok());
  EXPECT_NEAR(*h6, 12.146, 1e-3);
}

// Reference: ewma_vectors.json design_high_arl0 (references.md 2.4, computed by the
// integral equation with 300 nodes): lambda 0.1: 1e4 -> 3.749, 1e5 -> 4.322; lambda
// 0.2: 1e4 -> 3.834, 1e5 -> 4.384; and montgomery_ex_9_2_design (references.md 2.3:
// lambda 0.1, L 2.7 -> ARL0 368.99, ARL(1 sigma) 9.73).
TEST(ArlDesignTest, EwmaHighArl0Designs) {
  const nlohmann::json ref = LoadReference("ewma_vectors.json");
  ASSERT_FALSE(ref.is_null());
  ASSERT_EQ(ref["design_high_arl0"].size(), 4u);
  for (const nlohmann::json& row : ref["design_high_arl0"]) {
    const double lambda = row["lambda"].get<double>();
    const double arl0 = row["arl0"].get<double>();
    SCOPED_TRACE("lambda " + std::to_string(lambda) + " arl0 " + std::to_string(arl0));
    const Result<double> limit = EwmaLimitForArl(lambda, arl0);
    ASSERT_TRUE(limit.ok()) << limit.status().message();
    EXPECT_NEAR(*limit, row["L"].get<double>(), 5e-4);
    const double shifted = EwmaTwoSidedArl(lambda, *limit, 1.0);
    EXPECT_LT(RelErr(shifted, row["arl_shift1"].get<double>()), 0.01);
    EXPECT_LT(RelErr(shifted, row["arl_shift1"].get<double>()), 1e-3);
  }
  const nlohmann::json& m = ref["montgomery_ex_9_2_design"];
  EXPECT_NEAR(EwmaTwoSidedArl(0.1, 2.7, 0.0), m["arl0"].get<double>(), 0.01);
  EXPECT_NEAR(EwmaTwoSidedArl(0.1, 2.7, 1.0), m["arl_shift1"].get<double>(), 0.005);
}

// The table designs read backwards: the L that gives each tabulated pair's ARL0 is that
// pair's L. Reference: ewma_vectors.json arl rows at shift 0 (integral_eq, computed).
TEST(ArlDesignTest, EwmaLimitForArlInvertsTableRows) {
  const nlohmann::json ref = LoadReference("ewma_vectors.json");
  ASSERT_FALSE(ref.is_null());
  int checked = 0;
  for (const nlohmann::json& row : ref["arl"]) {
    if (row["shift_sigma"].get<double>() != 0.0) continue;
    const double lambda = row["lambda"].get<double>();
    const Result<double> limit = EwmaLimitForArl(lambda, row["integral_eq"].get<double>());
    ASSERT_TRUE(limit.ok());
    EXPECT_NEAR(*limit, row["L"].get<double>(), 2e-4) << "lambda " << lambda;
    ++checked;
  }
  EXPECT_EQ(checked, 8);
}

// ARL0 from 10 to 1e8 must work: the designed parameter reproduces its ARL0 and grows
// with it. Round trip through our own ARL (a consistency check of the solver).
TEST(ArlDesignTest, DesignRoundTripsOverArl0Range) {
  for (double k : {0.25, 0.5, 1.0}) {
    double previous = 0.0;
    for (double arl0 : {10.0, 100.0, 1e4, 1e6, 1e8}) {
      const Result<double> h = CusumThresholdForArl(k, arl0);
      ASSERT_TRUE(h.ok()) << "k " << k << " arl0 " << arl0 << ": " << h.status().message();
      EXPECT_LT(RelErr(CusumTwoSidedArl(k, *h, 0.0), arl0), 1e-7) << "k " << k << " " << arl0;
      EXPECT_GT(*h, previous);
      previous = *h;
    }
  }
  for (double lambda : {0.05, 0.2, 1.0}) {
    double previous = 0.0;
    for (double arl0 : {10.0, 1e3, 1e5, 1e8}) {
      const Result<double> limit = EwmaLimitForArl(lambda, arl0);
      ASSERT_TRUE(limit.ok()) << "lambda " << lambda << " arl0 " << arl0;
      EXPECT_LT(RelErr(EwmaTwoSidedArl(lambda, *limit, 0.0), arl0), 1e-7)
          << "lambda " << lambda << " " << arl0;
      EXPECT_GT(*limit, previous);
      previous = *limit;
    }
  }
  // The ends of the accepted range: ARL0 2 (L and h near 0, where the chains have
  // tiny states) and 1e10.
  for (double arl0 : {2.0, 1e10}) {
    const Result<double> h = CusumThresholdForArl(0.5, arl0);
    const Result<double> limit = EwmaLimitForArl(0.1, arl0);
    ASSERT_TRUE(h.ok() && limit.ok()) << arl0;
    EXPECT_LT(RelErr(CusumTwoSidedArl(0.5, *h, 0.0), arl0), 1e-6) << arl0;
    EXPECT_LT(RelErr(EwmaTwoSidedArl(0.1, *limit, 0.0), arl0), 1e-6) << arl0;
  }
  EXPECT_NEAR(EwmaTwoSidedArl(0.1, 1e-12, 0.0), 1.0, 1e-9);  // the first sample signals
  // lambda = 1: L = Phi^-1(1 - 1 / (2 ARL0)); 3.0902 for 500 (references.md 2.1).
  const Result<double> shewhart = EwmaLimitForArl(1.0, 500.0);
  ASSERT_TRUE(shewhart.ok());
  EXPECT_NEAR(*shewhart, 3.0902, 1e-4);
}

TEST(ArlDesignTest, DesignRejectsBadInputNamingTheParameter) {
  const auto expect_invalid = [](const Result<double>& r, const char* name) {
    ASSERT_FALSE(r.ok());
    EXPECT_EQ(r.status().code(), StatusCode::kInvalidArgument);
    EXPECT_NE(r.status().message().find(name), std::string::npos) << r.status().message();
  };
  const double nan = std::numeric_limits<double>::quiet_NaN();
  expect_invalid(CusumThresholdForArl(0.05, 500.0), "k must be");
  expect_invalid(CusumThresholdForArl(nan, 500.0), "k must be");
  expect_invalid(CusumThresholdForArl(0.5, 1.0), "arl0");
  expect_invalid(CusumThresholdForArl(0.5, nan), "arl0");
  expect_invalid(CusumThresholdForArl(0.5, 1e12), "arl0");
  // k = 3 already gives ARL0 ~370 at h = 0: 100 is out of reach.
  expect_invalid(CusumThresholdForArl(3.0, 100.0), "arl0");
  expect_invalid(EwmaLimitForArl(0.0, 500.0), "lambda");
  expect_invalid(EwmaLimitForArl(1.5, 500.0), "lambda");
  expect_invalid(EwmaLimitForArl(0.1, -3.0), "arl0");
  // The ARL functions signal bad input with NaN.
  EXPECT_TRUE(std::isnan(CusumOneSidedArl(0.5, -1.0, 0.0)));
  EXPECT_TRUE(std::isnan(CusumTwoSidedArl(0.5, 200.0, 0.0)));
  EXPECT_TRUE(std::isnan(CusumTwoSidedArl(0.5, 4.0, nan)));
  EXPECT_TRUE(std::isnan(EwmaTwoSidedArl(0.001, 3.0, 0.0)));
  EXPECT_TRUE(std::isnan(EwmaTwoSidedArl(0.1, 0.0, 0.0)));
  EXPECT_TRUE(std::isnan(EwmaTwoSidedArlMarkovChain(0.1, 3.0, 0.0, 300)));  // even
  EXPECT_TRUE(std::isnan(CusumOneSidedArlMarkovChain(0.5, 4.0, 0.0, 1)));
}

// Reference: references.md 7.3 (common-practice reasoning, computed): 100 tags at 1 Hz
// sharing a budget of one alarm per 600 s, 10 % of it for false alerts, need a per-tag
// ARL0 of N f 600 / 0.1 = 6e5 samples, i.e. 0.144 false alerts per tag per day.
TEST(ArlDesignTest, Arl0ForFalseAlarmRate) {
  EXPECT_DOUBLE_EQ(Arl0ForFalseAlarmRate(1.0, 1.0), 86400.0);
  EXPECT_DOUBLE_EQ(Arl0ForFalseAlarmRate(2.0, 0.5), 86400.0);
  const double per_tag_per_day = 86400.0 / 600.0 * 0.1 / 100.0;
  EXPECT_NEAR(Arl0ForFalseAlarmRate(per_tag_per_day, 1.0), 6e5, 1e-6);
  EXPECT_TRUE(std::isnan(Arl0ForFalseAlarmRate(0.0, 1.0)));
  EXPECT_TRUE(std::isnan(Arl0ForFalseAlarmRate(1.0, -1.0)));
  EXPECT_TRUE(std::isnan(Arl0ForFalseAlarmRate(std::numeric_limits<double>::quiet_NaN(), 1.0)));
}

// ---- Autocorrelation ----------------------------------------------------------------

// Derivation check (computed): the stationary variance of z = lambda sum_i
// (1-lambda)^i x_{t-i} for an AR(1) with unit marginal variance is
// lambda^2 sum_ij (1-lambda)^(i+j) phi^|i-j|; relative to the independent case
// lambda / (2 - lambda) this is (1 + phi (1-lambda)) / (1 - phi (1-lambda)), the
// variance used by Zhang's EWMAST chart (Zhang 1998, Technometrics, from memory).
TEST(ArlDesignTest, EwmaFactorMatchesDirectVarianceSum) {
  for (double lambda : {0.05, 0.1, 0.3, 1.0}) {
    for (double phi : {0.0, 0.3, 0.5, 0.9}) {
      const double a = 1.0 - lambda;
      // Truncate where a^n < 1e-18; the tail is below 1e-16 relative.
      const std::size_t n =
          lambda >= 1.0 ? 1 : static_cast<std::size_t>(std::ceil(std::log(1e-18) / std::log(a)));
      std::vector<double> a_pow(n), phi_pow(n);
      a_pow[0] = phi_pow[0] = 1.0;
      for (std::size_t i = 1; i < n; ++i) {
        a_pow[i] = a_pow[i - 1] * a;
        phi_pow[i] = phi_pow[i - 1] * phi;
      }
      double var = 0.0;
      for (std::size_t i = 0; i < n; ++i) {
        for (std::size_t j = 0; j < n; ++j) {
          var += a_pow[i] * a_pow[j] * phi_pow[i > j ? i - j : j - i];
        }
      }
      var *= lambda * lambda;
      const double factor = std::sqrt(var / (lambda / (2.0 - lambda)));
      EXPECT_NEAR(EwmaAutocorrelationFactor(lambda, phi), factor, 1e-9)
          << "lambda " << lambda << " phi " << phi;
    }
  }
}

TEST(ArlDesignTest, FactorsAndClamping) {
  // Long-run sd of AR(1) over marginal sd: sqrt((1+phi)/(1-phi)) (Box & Jenkins,
  // from memory); sqrt(3) at phi = 0.5.
  EXPECT_DOUBLE_EQ(CusumAutocorrelationFactor(0.5), std::sqrt(3.0));
  EXPECT_DOUBLE_EQ(CusumAutocorrelationFactor(0.0), 1.0);
  EXPECT_DOUBLE_EQ(CusumAutocorrelationFactor(-0.4), 1.0);  // clamped to 0
  EXPECT_DOUBLE_EQ(CusumAutocorrelationFactor(0.99), CusumAutocorrelationFactor(0.95));
  EXPECT_DOUBLE_EQ(CusumAutocorrelationFactor(std::numeric_limits<double>::quiet_NaN()), 1.0);
  EXPECT_DOUBLE_EQ(ClampAutocorrelation(2.0), kMaxAutocorrelation);
  // The EWMA factor runs from the long-run factor (lambda -> 0) to 1 (Shewhart).
  EXPECT_DOUBLE_EQ(EwmaAutocorrelationFactor(1.0, 0.5), 1.0);
  EXPECT_NEAR(EwmaAutocorrelationFactor(1e-9, 0.5), std::sqrt(3.0), 1e-8);
  EXPECT_DOUBLE_EQ(EwmaAutocorrelationFactor(0.1, 0.5), std::sqrt(1.45 / 0.55));
  EXPECT_TRUE(std::isnan(EwmaAutocorrelationFactor(0.0, 0.5)));

  Ar1Prewhitener white(0.5);
  EXPECT_DOUBLE_EQ(white.Filter(2.0), 2.0);  // first sample passes through
  EXPECT_DOUBLE_EQ(white.Filter(2.0), (2.0 - 1.0) / std::sqrt(0.75));
  EXPECT_TRUE(std::isnan(white.Filter(std::numeric_limits<double>::quiet_NaN())));
  EXPECT_DOUBLE_EQ(white.Filter(1.0), 0.0);  // previous is still 2
  white.Reset();
  EXPECT_DOUBLE_EQ(white.Filter(5.0), 5.0);
  white.set_phi(3.0);
  EXPECT_EQ(white.phi(), kMaxAutocorrelation);
}

// ---- Monte Carlo -------------------------------------------------------------------

struct RunStats {
  double mean;
  double se;  // standard error of the mean run length
};

// Mean run length of `runs` independent runs of a fresh copy of `chart` on samples
// drawn by `next(rng, start)` (start is true on a run's first sample).
template <typename Chart, typename Next>
RunStats SimulateRunLength(const Chart& chart, Next next, int runs, std::uint64_t seed) {
  std::mt19937_64 rng(seed);
  RunningMoments lengths;
  for (int r = 0; r < runs; ++r) {
    Chart c = chart;
    std::int64_t n = 0;
    bool signal = false;
    while (!signal && n < 10'000'000) {
      signal = c.Add(next(rng, n == 0)).signal;
      ++n;
    }
    lengths.Add(static_cast<double>(n));
  }
  return {lengths.mean(), lengths.stddev() / std::sqrt(static_cast<double>(runs))};
}

// White N(0, 1).
struct WhiteNoise {
  std::normal_distribution<double> normal;
  double operator()(std::mt19937_64& rng, bool /*start*/) { return normal(rng); }
};

// Stationary AR(1), marginal N(0, 1): each run starts from a fresh x_0 ~ N(0, 1).
struct Ar1Noise {
  double phi;
  std::normal_distribution<double> normal;
  double x = 0.0;
  double operator()(std::mt19937_64& rng, bool start) {
    x = start ? normal(rng) : phi * x + std::sqrt(1.0 - phi * phi) * normal(rng);
    return x;
  }
};

// AR(1) passed through the prewhitener (reset at each run's start).
struct PrewhitenedAr1 {
  Ar1Noise source;
  Ar1Prewhitener filter;
  double operator()(std::mt19937_64& rng, bool start) {
    if (start) filter.Reset();
    return filter.Filter(source(rng, start));
  }
};

constexpr double kDesignArl0 = 500.0;

// The designed chart on white N(0, 1) has the designed two-sided ARL0. 2500 runs give
// an SE of about 2 %; tolerance 4 SE (~8 %), so a design off by 10 % or more (e.g. the
// one-sided ARL, or h for 370 instead of 500, 26 % off) fails.
TEST(ArlDesignTest, MonteCarloDesignedChartsOnWhiteNoise) {
  const Result<double> h = CusumThresholdForArl(0.5, kDesignArl0);
  const Result<double> limit = EwmaLimitForArl(0.1, kDesignArl0);
  ASSERT_TRUE(h.ok() && limit.ok());
  const RunStats cusum = SimulateRunLength(CusumDetector(0.5, *h), WhiteNoise{}, 2500, 101);
  EXPECT_NEAR(cusum.mean, kDesignArl0, 4.0 * cusum.se) << "h " << *h << " se " << cusum.se;
  EXPECT_LT(cusum.se / kDesignArl0, 0.025);
  // Asymptotic limits, as the chain assumes.
  const RunStats ewma =
      SimulateRunLength(EwmaDetector(0.1, *limit, 0.0, 1.0, false), WhiteNoise{}, 2500, 202);
  EXPECT_NEAR(ewma.mean, kDesignArl0, 4.0 * ewma.se) << "L " << *limit << " se " << ewma.se;
}

// AR(1) residuals, phi = 0.5, innovations scaled so the marginal variance is 1.
//  * Uncorrected: the real ARL0 is far below design (this test measures about 54 for
//    the CUSUM and 60 for the EWMA): we require < 20 % of design.
//  * Variance-matching factor (sigma multiplied by it): approximate. It matches the
//    long-run (CUSUM) or stationary EWMA (EWMA) variance, not the run-length law, and
//    errs conservative: this test measures ~1900 +- 60 (3.8x design) for the CUSUM and
//    ~710 +- 22 (1.4x) for the EWMA; a separate numpy run with 20000 runs per case gave
//    2055 +- 15 and 735 +- 5 (computed). The CUSUM factor would be right in the
//    diffusion limit (small k, large h); at k = 0.5, h = 5 the discrete-time effects at
//    0 and at h, which Siegmund's 1.166 accounts for with independent data, differ for
//    correlated increments (common practice). Checks: never more alarm-prone than
//    designed (>= design - 4 SE) and within 6x (CUSUM) / 2x (EWMA); a wrong factor
//    fails: 1 gives ~54 and the marginal-only sqrt(1/(1-phi^2)) ~100 (computed), far
//    below the lower bound; an overcorrection beyond the long-run factor fails the upper.
//  * Prewhitened (Ar1Prewhitener): exact for AR(1): within 4 SE (~8 %) of design.
TEST(ArlDesignTest, MonteCarloAr1Correction) {
  constexpr double kPhi = 0.5;
  const Result<double> h = CusumThresholdForArl(0.5, kDesignArl0);
  const Result<double> limit = EwmaLimitForArl(0.1, kDesignArl0);
  ASSERT_TRUE(h.ok() && limit.ok());

  const RunStats raw_cusum =
      SimulateRunLength(CusumDetector(0.5, *h), Ar1Noise{kPhi, {}}, 2000, 301);
  const RunStats raw_ewma =
      SimulateRunLength(EwmaDetector(0.1, *limit, 0.0, 1.0, false), Ar1Noise{kPhi, {}}, 2000, 302);
  EXPECT_LT(raw_cusum.mean, 0.2 * kDesignArl0);
  EXPECT_LT(raw_ewma.mean, 0.2 * kDesignArl0);

  const double cusum_factor = CusumAutocorrelationFactor(kPhi);
  const double ewma_factor = EwmaAutocorrelationFactor(0.1, kPhi);
  const RunStats fixed_cusum =
      SimulateRunLength(CusumDetector(0.5, *h, 0.0, cusum_factor), Ar1Noise{kPhi, {}}, 1000, 303);
  const RunStats fixed_ewma = SimulateRunLength(EwmaDetector(0.1, *limit, 0.0, ewma_factor, false),
                                                Ar1Noise{kPhi, {}}, 1000, 304);
  EXPECT_GT(fixed_cusum.mean, kDesignArl0 - 4.0 * fixed_cusum.se);
  EXPECT_LT(fixed_cusum.mean, 6.0 * kDesignArl0);
  EXPECT_GT(fixed_ewma.mean, kDesignArl0 - 4.0 * fixed_ewma.se);
  EXPECT_LT(fixed_ewma.mean, 2.0 * kDesignArl0);

  const RunStats white_cusum = SimulateRunLength(
      CusumDetector(0.5, *h), PrewhitenedAr1{{kPhi, {}}, Ar1Prewhitener(kPhi)}, 2500, 305);
  const RunStats white_ewma =
      SimulateRunLength(EwmaDetector(0.1, *limit, 0.0, 1.0, false),
                        PrewhitenedAr1{{kPhi, {}}, Ar1Prewhitener(kPhi)}, 2500, 306);
  EXPECT_NEAR(white_cusum.mean, kDesignArl0, 4.0 * white_cusum.se);
  EXPECT_NEAR(white_ewma.mean, kDesignArl0, 4.0 * white_ewma.se);

  std::printf(
      "[ AR(1) phi 0.5, design ARL0 500 ] CUSUM raw %.1f, factor %.0f +- %.0f, "
      "prewhitened %.0f +- %.0f; EWMA raw %.1f, factor %.0f +- %.0f, prewhitened "
      "%.0f +- %.0f\n",
      raw_cusum.mean, fixed_cusum.mean, fixed_cusum.se, white_cusum.mean, white_cusum.se,
      raw_ewma.mean, fixed_ewma.mean, fixed_ewma.se, white_ewma.mean, white_ewma.se);
}

}  // namespace
}  // namespace nightjar::core
