// Average run length (ARL) of the CUSUM and EWMA charts, and the inverse problem:
// the chart parameter that gives a wanted in-control ARL (ARL0), plus corrections for
// autocorrelated input.
//
// All ARLs are zero-start (C+- = 0, z_0 = 0), in samples, for independent N(shift, 1)
// observations of a chart standardised to mean 0 and sigma 1 (shift in sigmas):
//  * CUSUM: Brook & Evans (1972) Markov chain. The interval [0, h] is cut into m states
//    of width w = 2h / (2m - 1) (state 0 = [0, w/2] holds the atom at 0). Its transition
//    matrix is Toeplitz apart from the column into state 0, so the zero-start ARL is the
//    renewal ratio x_0 / y_0 with (I - T) x = 1 and (I - T) y = P(exceed h), both solved
//    by a Levinson recursion in O(m^2) (no m x m matrix is formed).
//  * EWMA: Lucas & Saccucci (1990) Markov chain on the asymptotic limits +-c,
//    c = L sqrt(lambda / (2 - lambda)), with 2m + 1 states, solved by Eigen's
//    partial-pivot LU. At shift 0 the chain is symmetric and folded to m + 1 states.
//  Both chains err by O(w^2); each ARL is computed at two state counts (ratio ~2) and
//  Richardson-extrapolated. Relative error against integral-equation solutions
//  (tests/core/arl_design_test.cc, and spot checks up to ARL 5e8): CUSUM <= ~2e-5;
//  EWMA <= ~1e-5 for ARL <= 1e5, up to ~3e-4 for ARL ~1e8 with lambda <= 0.1. In a
//  design this moves h or L by at most ~1e-4 (ln ARL rises ~1 per unit h and ~4 per
//  unit L there). The EWMA solve also loses ~eps * ARL to cancellation.
//  Two-sided CUSUM: 1/ARL = 1/ARL+ + 1/ARL- (Van Dobben de Bruyn 1968, from memory;
//  simulation of the real two-sided scheme agrees to < 0.1 %, references.md 1.1).
//
// Supported range (outside it the ARL functions return NaN and the design functions
// InvalidArgument): CUSUM 0 <= h <= 100, |k| <= 5; EWMA 0.01 <= lambda <= 1,
// 0 < L <= 10; |shift| <= 10. Cost per call, one core of the build machine: CUSUM ARL
// O(m^2), m ~ 20 h: 0.05 ms at h = 5, 0.25 ms at h = 12.7; EWMA ARL a dense LU on
// ~30 L states (folded to half at shift 0): 0.3 / 0.8 ms at L = 2.8 (shift 0 / 1),
// 4.5 ms at lambda = 0.01. Design at ARL0 1e6: CusumThresholdForArl ~1 ms (k = 0.5),
// EwmaLimitForArl ~4 ms (lambda 0.05 .. 1), ~15 ms at lambda = 0.01 (~27 ms at 1e8).
//
// Thread-safety: all functions are pure (no shared state) and may run concurrently.
// They allocate working memory: call them at configuration time, not per sample.
// Ar1Prewhitener is a per-sample value type that never allocates; one owner thread.
#pragma once

#include "core/status.h"

namespace nightjar::core {

// ---- Run lengths ------------------------------------------------------------------

// Upper one-sided tabular CUSUM (C+ only; signal when C+ > h), reference value k,
// decision interval h, observations N(shift, 1). h = 0 gives 1 / P(x > k) exactly.
double CusumOneSidedArl(double k, double h, double shift);
// Two-sided tabular CUSUM: 1/ARL = 1/ARL+(shift) + 1/ARL+(-shift).
double CusumTwoSidedArl(double k, double h, double shift);
// Two-sided EWMA chart with asymptotic limits +-L sqrt(lambda / (2 - lambda)), z_0 = 0.
// lambda = 1 is the Shewhart chart.
double EwmaTwoSidedArl(double lambda, double limit_factor, double shift);

// The raw chains at a given state count, without extrapolation: for cross-checks
// against published chain results. CUSUM: `states` = m >= 2 (Brook & Evans). EWMA:
// `states` = 2m + 1 >= 3, odd (Lucas & Saccucci). NaN on unsupported input.
double CusumOneSidedArlMarkovChain(double k, double h, double shift, int states);
double EwmaTwoSidedArlMarkovChain(double lambda, double limit_factor, double shift, int states);

// Siegmund (1985) approximation for the one-sided CUSUM: with b = h + 1.166 and
// D = shift - k, ARL = (exp(-2 D b) + 2 D b - 1) / (2 D^2), and b^2 at D = 0.
// Within ~1 % in control but 15 % short at large shifts (references.md 1.2): a loose
// cross-check, not a design tool.
double SiegmundOneSidedArl(double k, double h, double shift);
// 1/ARL = 1/ARL+(shift - k) + 1/ARL+(-shift - k) with the one-sided formula above.
double SiegmundTwoSidedArl(double k, double h, double shift);

// ---- Design -----------------------------------------------------------------------

// h such that the two-sided CUSUM with reference value k has in-control ARL arl0
// (within ~2e-5 of the exact h). k in [0.1, 3]; arl0 in [2, 1e10] and above the ARL0 of
// the chart at h = 0, 1 / (2 P(x > k)); otherwise InvalidArgument naming the parameter.
Result<double> CusumThresholdForArl(double k, double arl0);
// L such that the two-sided EWMA chart (asymptotic limits) with weight lambda has
// in-control ARL arl0 (within ~1e-5 of the exact L, ~1e-4 at ARL0 1e8). lambda in [0.01, 1], arl0
// in [2, 1e10]; otherwise InvalidArgument naming the parameter.
Result<double> EwmaLimitForArl(double lambda, double arl0);

// In-control ARL (samples) that gives a false-alarm rate per day at one sample every
// sample_period_s seconds: (86400 / sample_period_s) / false_alarms_per_day. NaN unless
// both arguments are > 0 and finite.
double Arl0ForFalseAlarmRate(double false_alarms_per_day, double sample_period_s);

// ---- Autocorrelated input (DESIGN-NOTES 2) ------------------------------------------
//
// Residuals are positively autocorrelated, which shortens a chart's real ARL0 far
// below its independent-data design (at phi = 0.5, a CUSUM designed for 500 runs ~55).
// For an AR(1) stream with lag-1 autocorrelation phi, standardised to marginal variance
// 1, there are two remedies:
//  1. Divide the standardised input by a variance-matching factor (below), or
//     equivalently multiply the chart's sigma by it. This is an approximation that
//     matches a variance, not the run-length distribution, and it errs on the
//     conservative side: by Monte Carlo (tests/core/arl_design_test.cc; phi = 0.5,
//     design ARL0 500) the CUSUM (k = 0.5) runs about 4x longer than designed and the
//     EWMA (lambda = 0.1) about 1.4x longer. The CUSUM factor is right only in the
//     diffusion limit, small k and large h (common practice).
//  2. Prewhiten (Ar1Prewhitener): e_t = (x_t - phi x_{t-1}) / sqrt(1 - phi^2) is
//     independent N(0, 1) for an AR(1) stream, so the independent-data design holds
//     exactly. A sustained shift delta in x shows in e as delta sqrt((1 - phi) / (1 + phi))
//     after the first sample -- the same shift size the factor of remedy 1 leaves.
// phi is clamped to [kMinAutocorrelation, kMaxAutocorrelation]: a negative phi would
// tighten the chart, which we never do (negatively correlated input lengthens the
// uncorrected ARL0 instead; expected, not measured), and above 0.95 the stream is too
// close to a random walk for a fixed correction to mean much.

inline constexpr double kMinAutocorrelation = 0.0;
inline constexpr double kMaxAutocorrelation = 0.95;

// phi clamped to [kMinAutocorrelation, kMaxAutocorrelation]; NaN -> 0 (no correction).
double ClampAutocorrelation(double phi);
// Long-run standard deviation of an AR(1) relative to its marginal one,
// sqrt((1 + phi) / (1 - phi)), phi clamped.
double CusumAutocorrelationFactor(double phi);
// Stationary standard deviation of the EWMA of an AR(1) relative to that of the EWMA of
// independent data with the same marginal variance, sqrt((1 + phi (1 - lambda)) /
// (1 - phi (1 - lambda))) (from Var z = lambda^2 sum_ij (1 - lambda)^(i+j)
// phi^|i-j|), phi clamped. lambda outside (0, 1] gives NaN.
double EwmaAutocorrelationFactor(double lambda, double phi);

// e_t = (x_t - phi x_{t-1}) / sqrt(1 - phi^2), with e_1 = x_1 (a stationary x_1 already
// has variance 1). phi is clamped as above. Non-finite x is passed through without
// touching the state (the caller drops it anyway).
class Ar1Prewhitener {
 public:
  explicit Ar1Prewhitener(double phi);

  double Filter(double x);
  // Forget the previous sample (the next one is treated as the first).
  void Reset() { has_previous_ = false; }
  // New phi (e.g. from Lag1Autocorrelation); keeps the previous sample.
  void set_phi(double phi);
  double phi() const { return phi_; }

 private:
  double phi_ = 0.0;
  double scale_ = 1.0;  // 1 / sqrt(1 - phi^2)
  double previous_ = 0.0;
  bool has_previous_ = false;
};

}  // namespace nightjar::core
