#include "core/arl_design.h"

#include <Eigen/Dense>
#include <algorithm>
#include <cmath>
#include <limits>
#include <string>
#include <utility>
#include <vector>

#include "core/time.h"

namespace nightjar::core {
namespace {

constexpr double kNan = std::numeric_limits<double>::quiet_NaN();
constexpr double kInf = std::numeric_limits<double>::infinity();
constexpr double kInvSqrt2 = 0.70710678118654752440;

// Supported ranges (see the header).
constexpr double kMaxCusumH = 100.0;
constexpr double kMaxAbsCusumK = 5.0;
constexpr double kMinLambda = 0.01;
constexpr double kMaxLimitFactor = 10.0;
constexpr double kMaxAbsShift = 10.0;
constexpr double kMinDesignK = 0.1;
constexpr double kMaxDesignK = 3.0;
constexpr double kMinDesignArl0 = 2.0;
constexpr double kMaxDesignArl0 = 1e10;
constexpr int kMaxCusumStates = 20000;  // O(m) memory, O(m^2) time
constexpr int kMaxEwmaStates = 2001;    // dense (2m+1)^2 matrix: 32 MB at this size

// Chain sizes. CUSUM: state width about 0.05 sigma; EWMA: about 32 L states, more for
// small lambda. With Richardson extrapolation these leave ~1e-6 relative error (the
// raw chains at these sizes err by ~1e-3 .. 1e-2).
constexpr double kCusumStateWidth = 0.05;
constexpr int kMinCusumStates = 50;
constexpr int kMaxCusumCoarseStates = 1000;
constexpr double kEwmaStatesPerL = 32.0;
constexpr int kMinEwmaStates = 61;
constexpr int kMaxEwmaCoarseStates = 401;
constexpr int kRoughEwmaStates = 41;  // first guess in EwmaLimitForArl only

// Beyond this many standard deviations a normal tail (< 1.2e-19) cannot change an ARL
// below 1e10 in double precision, so those erfc calls are skipped.
constexpr double kNegligibleZ = 9.0;

double NormalCdf(double x) { return 0.5 * std::erfc(-x * kInvSqrt2); }
double NormalSf(double x) { return 0.5 * std::erfc(x * kInvSqrt2); }

// P(a < Z <= b) for a <= b, from the nearer tail so small masses keep their precision.
double NormalMass(double a, double b) {
  if (a >= 0.0) return NormalSf(a) - NormalSf(b);
  if (b <= 0.0) return NormalCdf(b) - NormalCdf(a);
  return 1.0 - NormalCdf(a) - NormalSf(b);
}

bool CusumArgsOk(double k, double h, double shift) {
  return std::abs(k) <= kMaxAbsCusumK && h >= 0.0 && h <= kMaxCusumH &&
         std::abs(shift) <= kMaxAbsShift;  // comparisons are false for NaN
}

bool EwmaArgsOk(double lambda, double limit_factor, double shift) {
  return lambda >= kMinLambda && lambda <= 1.0 && limit_factor > 0.0 &&
         limit_factor <= kMaxLimitFactor && std::abs(shift) <= kMaxAbsShift;
}

// Brook & Evans chain with m states for the upper CUSUM, h > 0. P = T + u e_0^T where
// T[i][j] = g(j - i) is the Toeplitz part (interval masses) and u_i the mass below
// -w/2 that the chain lumps into state 0. With x = (I - T)^-1 1 (run length until
// leaving [-w/2, h] either way) and y = (I - T)^-1 q (probability of leaving above h),
// Sherman-Morrison gives L_0 = x_0 / (1 - z_0) with z = (I - T)^-1 u, and since
// (I - T) 1 = u + q, 1 - z = y: L_0 = x_0 / y_0, with no cancellation.
// I - T is strictly diagonally dominant (rows of P sum to at most 1), so every leading
// block is nonsingular and the Levinson recursion below is well defined.
double CusumChain(double k, double h, double shift, int m) {
  const double w = 2.0 * h / (2.0 * m - 1.0);
  const double offset = k - shift;  // x - k = Z + shift - k, Z ~ N(0, 1)
  const auto size = static_cast<std::size_t>(m);
  // t_col[n] = (I - T)[n][0], t_row[n] = (I - T)[0][n].
  std::vector<double> t_col(size), t_row(size), q(size);
  for (std::size_t n = 0; n < size; ++n) {
    const auto d = static_cast<double>(n);
    const double down = NormalMass((-d - 0.5) * w + offset, (-d + 0.5) * w + offset);
    const double up = NormalMass((d - 0.5) * w + offset, (d + 0.5) * w + offset);
    t_col[n] = (n == 0 ? 1.0 : 0.0) - down;
    t_row[n] = (n == 0 ? 1.0 : 0.0) - up;
    q[n] = NormalSf(h - d * w + offset);  // from state n straight above h
  }
  // Levinson recursion for the nonsymmetric Toeplitz system, two right-hand sides.
  std::vector<double> fwd(size), bwd(size), next_fwd(size), next_bwd(size);
  std::vector<double> x(size), y(size);
  fwd[0] = bwd[0] = 1.0 / t_col[0];
  x[0] = 1.0 / t_col[0];
  y[0] = q[0] / t_col[0];
  for (std::size_t s = 1; s < size; ++s) {
    double e_fwd = 0.0, e_bwd = 0.0, e_x = 0.0, e_y = 0.0;
    for (std::size_t i = 0; i < s; ++i) {
      const double c = t_col[s - i];
      e_fwd += c * fwd[i];
      e_x += c * x[i];
      e_y += c * y[i];
      e_bwd += t_row[i + 1] * bwd[i];
    }
    const double inv_den = 1.0 / (1.0 - e_fwd * e_bwd);
    for (std::size_t i = 0; i <= s; ++i) {
      const double f_ext = i < s ? fwd[i] : 0.0;
      const double b_ext = i > 0 ? bwd[i - 1] : 0.0;
      next_fwd[i] = (f_ext - e_fwd * b_ext) * inv_den;
      next_bwd[i] = (b_ext - e_bwd * f_ext) * inv_den;
    }
    std::swap(fwd, next_fwd);
    std::swap(bwd, next_bwd);
    const double cx = 1.0 - e_x;
    const double cy = q[s] - e_y;
    x[s] = y[s] = 0.0;
    for (std::size_t i = 0; i <= s; ++i) {
      x[i] += cx * bwd[i];
      y[i] += cy * bwd[i];
    }
  }
  if (!(y[0] > 0.0)) return kInf;  // exit above h underflowed: astronomically long
  return x[0] / y[0];
}

// Lucas & Saccucci chain with n = 2m + 1 states on [-c, c]; starts in the middle one.
double EwmaChain(double lambda, double limit_factor, double shift, int n) {
  const double c = limit_factor * std::sqrt(lambda / (2.0 - lambda));
  const double w = 2.0 * c / n;
  const int m = (n - 1) / 2;
  const double keep = 1.0 - lambda;
  // Symmetric at shift 0: L_i = L_{n-1-i}, so only states m..n-1 are unknowns.
  const bool fold = shift == 0.0;
  const int unknowns = fold ? m + 1 : n;
  const int first_row = fold ? m : 0;
  Eigen::MatrixXd a = Eigen::MatrixXd::Identity(unknowns, unknowns);
  std::vector<double> tail(static_cast<std::size_t>(n) + 1);  // Phi or 1-Phi per boundary
  for (int i = first_row; i < n; ++i) {
    const double center = -c + (i + 0.5) * w;
    // Boundary j maps to z-score (b_j - keep * center) / lambda - shift, increasing in j.
    const double base = (-c - keep * center) / lambda - shift;
    const double step = w / lambda;
    // Clamped as doubles first: for a tiny L the quotients overflow an int.
    const auto bound = static_cast<double>(n);
    const auto j_lo =
        static_cast<int>(std::clamp(std::floor((-kNegligibleZ - base) / step), 0.0, bound));
    const auto j_hi =
        static_cast<int>(std::clamp(std::ceil((kNegligibleZ - base) / step), -1.0, bound));
    for (int j = j_lo; j <= j_hi; ++j) {
      const double z = base + j * step;
      tail[static_cast<std::size_t>(j)] = z < 0.0 ? NormalCdf(z) : NormalSf(z);
    }
    for (int j = j_lo; j < j_hi; ++j) {
      const double z0 = base + j * step;
      const double z1 = z0 + step;
      const double lo = tail[static_cast<std::size_t>(j)];
      const double hi = tail[static_cast<std::size_t>(j) + 1];
      double p;
      if (z0 >= 0.0) {
        p = lo - hi;
      } else if (z1 <= 0.0) {
        p = hi - lo;
      } else {
        p = 1.0 - lo - hi;
      }
      const int col = fold ? (j >= m ? j - m : (n - 1 - j) - m) : j;
      a(i - first_row, col) -= p;
    }
  }
  const Eigen::VectorXd arl = a.partialPivLu().solve(Eigen::VectorXd::Ones(unknowns));
  return arl(fold ? 0 : m);
}

int Odd(int n) { return n % 2 == 0 ? n + 1 : n; }

// Richardson extrapolation of an O(w^2) error: w_coarse / w_fine = ratio.
double Extrapolate(double coarse, double fine, double ratio) {
  if (!std::isfinite(coarse) || !std::isfinite(fine)) return fine;
  const double r2 = ratio * ratio;
  return std::max(1.0, (r2 * fine - coarse) / (r2 - 1.0));
}

// Illinois (modified regula falsi) root of an increasing f on [lo, hi] with
// f(lo) < 0 < f(hi). Superlinear on the near-linear log-ARL curves used here.
template <typename F>
double IllinoisRoot(const F& f, double lo, double f_lo, double hi, double f_hi) {
  int side = 0;
  double x = lo;
  for (int iter = 0; iter < 60; ++iter) {
    x = hi - f_hi * (hi - lo) / (f_hi - f_lo);
    const double fx = f(x);
    // 1e-10 in log ARL is far below the chains' own error; the width test ends the
    // search if rounding noise in f (about eps * ARL for the EWMA) never gets that low.
    if (std::abs(fx) < 1e-10 || hi - lo < 1e-9 * (1.0 + std::abs(x))) return x;
    if (fx > 0.0) {
      hi = x;
      f_hi = fx;
      if (side == 1) f_lo *= 0.5;
      side = 1;
    } else {
      lo = x;
      f_lo = fx;
      if (side == -1) f_hi *= 0.5;
      side = -1;
    }
  }
  return x;
}

// Expands [lo, hi] from a first guess until f changes sign; false if f stays negative
// up to `limit`. f(floor) < 0 is known.
template <typename F>
bool Bracket(const F& f, double guess, double step, double floor, double f_floor, double limit,
             double* lo, double* f_lo, double* hi, double* f_hi) {
  double x = std::clamp(guess, floor + step, limit);
  double fx = f(x);
  if (fx >= 0.0) {
    *hi = x;
    *f_hi = fx;
    for (;;) {  // walk down until negative, or reach the known-negative floor
      const double down = x - step;
      if (down <= floor) {
        *lo = floor;
        *f_lo = f_floor;
        return true;
      }
      const double fd = f(down);
      if (fd < 0.0) {
        *lo = down;
        *f_lo = fd;
        return true;
      }
      *hi = x = down;
      *f_hi = fd;
      step *= 2.0;
    }
  }
  *lo = x;
  *f_lo = fx;
  for (;;) {
    if (x >= limit) return false;
    const double up = std::min(limit, x + step);
    const double fu = f(up);
    if (fu >= 0.0) {
      *hi = up;
      *f_hi = fu;
      return true;
    }
    *lo = x = up;
    *f_lo = fu;
    step *= 2.0;
  }
}

// Two-sided Siegmund h for arl0, by bisection on the closed form: a first guess only.
double SiegmundThreshold(double k, double arl0) {
  double lo = 0.0, hi = kMaxCusumH;
  for (int i = 0; i < 80; ++i) {
    const double mid = 0.5 * (lo + hi);
    (SiegmundTwoSidedArl(k, mid, 0.0) < arl0 ? lo : hi) = mid;
  }
  return 0.5 * (lo + hi);
}

std::string Num(double v) { return std::to_string(v); }

}  // namespace

double CusumOneSidedArlMarkovChain(double k, double h, double shift, int states) {
  if (!CusumArgsOk(k, h, shift) || states < 2 || states > kMaxCusumStates) return kNan;
  if (h == 0.0) return 1.0 / NormalSf(k - shift);
  return CusumChain(k, h, shift, states);
}

double CusumOneSidedArl(double k, double h, double shift) {
  if (!CusumArgsOk(k, h, shift)) return kNan;
  // With h = 0 the first sample signals iff x > k: geometric run length.
  if (h == 0.0) return 1.0 / NormalSf(k - shift);
  const int coarse = std::clamp(static_cast<int>(std::ceil(h / kCusumStateWidth)), kMinCusumStates,
                                kMaxCusumCoarseStates);
  const int fine = 2 * coarse;
  const double ratio = (2.0 * fine - 1.0) / (2.0 * coarse - 1.0);  // w_coarse / w_fine
  return Extrapolate(CusumChain(k, h, shift, coarse), CusumChain(k, h, shift, fine), ratio);
}

double CusumTwoSidedArl(double k, double h, double shift) {
  const double up = CusumOneSidedArl(k, h, shift);
  const double down = shift == 0.0 ? up : CusumOneSidedArl(k, h, -shift);
  if (std::isnan(up) || std::isnan(down)) return kNan;
  return 1.0 / (1.0 / up + 1.0 / down);
}

double EwmaTwoSidedArlMarkovChain(double lambda, double limit_factor, double shift, int states) {
  if (!EwmaArgsOk(lambda, limit_factor, shift) || states < 3 || states % 2 == 0 ||
      states > kMaxEwmaStates) {
    return kNan;
  }
  return EwmaChain(lambda, limit_factor, shift, states);
}

double EwmaTwoSidedArl(double lambda, double limit_factor, double shift) {
  if (!EwmaArgsOk(lambda, limit_factor, shift)) return kNan;
  // Small lambda needs finer states (the transition kernel narrows); empirical rule.
  const double boost = std::max(1.0, std::sqrt(0.05 / lambda));
  const int coarse =
      Odd(std::clamp(static_cast<int>(std::ceil(kEwmaStatesPerL * limit_factor * boost)),
                     kMinEwmaStates, kMaxEwmaCoarseStates));
  const int fine = 2 * coarse + 1;
  const double ratio = static_cast<double>(fine) / coarse;  // w_coarse / w_fine
  return Extrapolate(EwmaChain(lambda, limit_factor, shift, coarse),
                     EwmaChain(lambda, limit_factor, shift, fine), ratio);
}

double SiegmundOneSidedArl(double k, double h, double shift) {
  if (!std::isfinite(k) || !(h >= 0.0) || !std::isfinite(h) || !std::isfinite(shift)) {
    return kNan;
  }
  const double d = shift - k;
  const double b = h + 1.166;
  const double u = 2.0 * d * b;
  // (e^-u + u - 1) / (2 d^2) = b^2 (1 - u/3 + u^2/12 - u^3/60 + ...) for small u, where
  // the closed form cancels.
  if (std::abs(u) < 1e-3) return b * b * (1.0 - u / 3.0 + u * u / 12.0 - u * u * u / 60.0);
  return (std::expm1(-u) + u) / (2.0 * d * d);
}

double SiegmundTwoSidedArl(double k, double h, double shift) {
  const double up = SiegmundOneSidedArl(k, h, shift);
  const double down = SiegmundOneSidedArl(k, h, -shift);
  return 1.0 / (1.0 / up + 1.0 / down);
}

Result<double> CusumThresholdForArl(double k, double arl0) {
  if (!(k >= kMinDesignK && k <= kMaxDesignK)) {
    return Status::InvalidArgument("CusumThresholdForArl: k must be in [" + Num(kMinDesignK) +
                                   ", " + Num(kMaxDesignK) + "], got " + Num(k));
  }
  if (!(arl0 >= kMinDesignArl0 && arl0 <= kMaxDesignArl0)) {
    return Status::InvalidArgument("CusumThresholdForArl: arl0 must be in [2, 1e10], got " +
                                   Num(arl0));
  }
  const double log_target = std::log(arl0);
  const double arl_at_zero = 0.5 / NormalSf(k);  // two-sided, h = 0
  const double f_zero = std::log(arl_at_zero) - log_target;
  if (f_zero >= 0.0) {
    return Status::InvalidArgument("CusumThresholdForArl: arl0 = " + Num(arl0) +
                                   " is below the ARL0 of k = " + Num(k) + " at h = 0 (" +
                                   Num(arl_at_zero) + "); use a smaller k");
  }
  const auto f = [&](double h) { return std::log(CusumTwoSidedArl(k, h, 0.0)) - log_target; };
  double lo = 0.0, f_lo = 0.0, hi = 0.0, f_hi = 0.0;
  // Siegmund's h is within a few hundredths of the exact one in control.
  if (!Bracket(f, SiegmundThreshold(k, arl0), 0.05, 0.0, f_zero, kMaxCusumH, &lo, &f_lo, &hi,
               &f_hi)) {
    return Status::InvalidArgument("CusumThresholdForArl: arl0 = " + Num(arl0) + " needs h > " +
                                   Num(kMaxCusumH) + " at k = " + Num(k));
  }
  return IllinoisRoot(f, lo, f_lo, hi, f_hi);
}

Result<double> EwmaLimitForArl(double lambda, double arl0) {
  if (!(lambda >= kMinLambda && lambda <= 1.0)) {
    return Status::InvalidArgument("EwmaLimitForArl: lambda must be in [0.01, 1], got " +
                                   Num(lambda));
  }
  if (!(arl0 >= kMinDesignArl0 && arl0 <= kMaxDesignArl0)) {
    return Status::InvalidArgument("EwmaLimitForArl: arl0 must be in [2, 1e10], got " + Num(arl0));
  }
  const double log_target = std::log(arl0);
  // As L -> 0 the first sample signals: ARL -> 1.
  const double f_zero = -log_target;
  const auto f = [&](double limit) {
    return std::log(EwmaTwoSidedArl(lambda, limit, 0.0)) - log_target;
  };
  // First a root on small extrapolated chains (~1e-3 off in ARL, tens of microseconds
  // per call), from sqrt(2 ln arl0), which is at or above the Shewhart (lambda = 1) limit,
  // the largest; then the full computation needs only a narrow bracket around it.
  const auto rough = [&](double limit) {
    const int fine = 2 * kRoughEwmaStates + 1;
    const double arl = Extrapolate(EwmaChain(lambda, limit, 0.0, kRoughEwmaStates),
                                   EwmaChain(lambda, limit, 0.0, fine),
                                   static_cast<double>(fine) / kRoughEwmaStates);
    return std::log(arl) - log_target;
  };
  double lo = 0.0, f_lo = 0.0, hi = 0.0, f_hi = 0.0;
  if (!Bracket(rough, std::sqrt(2.0 * log_target), 0.1, 0.0, f_zero, kMaxLimitFactor, &lo, &f_lo,
               &hi, &f_hi)) {
    return Status::InvalidArgument("EwmaLimitForArl: arl0 = " + Num(arl0) + " needs L > " +
                                   Num(kMaxLimitFactor) + " at lambda = " + Num(lambda));
  }
  const double first_guess = IllinoisRoot(rough, lo, f_lo, hi, f_hi);
  if (!Bracket(f, first_guess, 0.003, 0.0, f_zero, kMaxLimitFactor, &lo, &f_lo, &hi, &f_hi)) {
    return Status::InvalidArgument("EwmaLimitForArl: arl0 = " + Num(arl0) + " needs L > " +
                                   Num(kMaxLimitFactor) + " at lambda = " + Num(lambda));
  }
  return IllinoisRoot(f, lo, f_lo, hi, f_hi);
}

double Arl0ForFalseAlarmRate(double false_alarms_per_day, double sample_period_s) {
  const bool ok = false_alarms_per_day > 0.0 && false_alarms_per_day < kInf &&
                  sample_period_s > 0.0 && sample_period_s < kInf;
  if (!ok) return kNan;
  return (kSecondsPerDay / sample_period_s) / false_alarms_per_day;
}

double ClampAutocorrelation(double phi) {
  if (std::isnan(phi)) return 0.0;
  return std::clamp(phi, kMinAutocorrelation, kMaxAutocorrelation);
}

double CusumAutocorrelationFactor(double phi) {
  const double p = ClampAutocorrelation(phi);
  return std::sqrt((1.0 + p) / (1.0 - p));
}

double EwmaAutocorrelationFactor(double lambda, double phi) {
  if (!(lambda > 0.0 && lambda <= 1.0)) return kNan;
  const double a = ClampAutocorrelation(phi) * (1.0 - lambda);
  return std::sqrt((1.0 + a) / (1.0 - a));
}

Ar1Prewhitener::Ar1Prewhitener(double phi) { set_phi(phi); }

void Ar1Prewhitener::set_phi(double phi) {
  phi_ = ClampAutocorrelation(phi);
  scale_ = 1.0 / std::sqrt(1.0 - phi_ * phi_);
}

double Ar1Prewhitener::Filter(double x) {
  if (!std::isfinite(x)) return x;
  const double e = has_previous_ ? (x - phi_ * previous_) * scale_ : x;
  previous_ = x;
  has_previous_ = true;
  return e;
}

}  // namespace nightjar::core
