#include "core/running_moments.h"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <string>

namespace nightjar::core {
namespace {

// Release builds keep a defined behaviour for a bad alpha instead of dividing by zero
// or diverging; the assert catches the bug in debug builds.
double SanitizeAlpha(double alpha) {
  assert(ExponentialMoments::Validate(alpha).ok());
  if (!(alpha > 0.0)) return 1e-6;  // also catches NaN
  return std::min(alpha, 1.0);
}

}  // namespace

void RunningMoments::Add(double x) {
  if (!std::isfinite(x)) return;
  ++count_;
  const double delta = x - mean_;
  mean_ += delta / static_cast<double>(count_);
  // (x - M_{k-1}) (x - M_k): both factors are small deviations, so no cancellation.
  sum_sq_dev_ += delta * (x - mean_);
}

void RunningMoments::Reset() { *this = RunningMoments(); }

double RunningMoments::variance() const {
  if (count_ < 2) return 0.0;
  return sum_sq_dev_ / static_cast<double>(count_ - 1);
}

double RunningMoments::stddev() const { return std::sqrt(variance()); }

double RunningMoments::population_variance() const {
  if (count_ < 1) return 0.0;
  return sum_sq_dev_ / static_cast<double>(count_);
}

ExponentialMoments::ExponentialMoments(double alpha) : alpha_(SanitizeAlpha(alpha)) {}

Status ExponentialMoments::Validate(double alpha) {
  if (!(alpha > 0.0 && alpha <= 1.0)) {
    return Status::InvalidArgument("alpha must be in (0, 1], got " + std::to_string(alpha));
  }
  return Status::Ok();
}

void ExponentialMoments::Add(double x) {
  if (!std::isfinite(x)) return;
  ++count_;
  if (count_ == 1) {
    mean_ = x;
    variance_ = 0.0;
    return;
  }
  const double delta = x - mean_;
  const double increment = alpha_ * delta;
  mean_ += increment;
  variance_ = (1.0 - alpha_) * (variance_ + delta * increment);
}

void ExponentialMoments::Reset() {
  count_ = 0;
  mean_ = 0.0;
  variance_ = 0.0;
}

double ExponentialMoments::stddev() const { return std::sqrt(variance_); }

Lag1Autocorrelation::Lag1Autocorrelation(double alpha) : alpha_(SanitizeAlpha(alpha)) {}

void Lag1Autocorrelation::Add(double x) {
  if (!std::isfinite(x)) return;
  ++count_;
  if (count_ == 1) {
    previous_ = x;
    return;
  }
  const double lagged = previous_;
  previous_ = x;
  if (count_ == 2) {  // first pair: weighted moments start at the pair itself
    mean_lagged_ = lagged;
    mean_current_ = x;
    var_lagged_ = var_current_ = covariance_ = 0.0;
    return;
  }
  const double d_lagged = lagged - mean_lagged_;
  const double d_current = x - mean_current_;
  mean_lagged_ += alpha_ * d_lagged;
  mean_current_ += alpha_ * d_current;
  const double keep = 1.0 - alpha_;
  var_lagged_ = keep * (var_lagged_ + alpha_ * d_lagged * d_lagged);
  var_current_ = keep * (var_current_ + alpha_ * d_current * d_current);
  covariance_ = keep * (covariance_ + alpha_ * d_lagged * d_current);
}

void Lag1Autocorrelation::Reset() {
  count_ = 0;
  previous_ = mean_lagged_ = mean_current_ = 0.0;
  var_lagged_ = var_current_ = covariance_ = 0.0;
}

double Lag1Autocorrelation::value() const {
  if (!(var_lagged_ > 0.0 && var_current_ > 0.0)) return 0.0;
  // sqrt of each factor separately: the product of two tiny variances could underflow.
  const double r = covariance_ / (std::sqrt(var_lagged_) * std::sqrt(var_current_));
  if (!std::isfinite(r)) return 0.0;  // moments overflowed (|x| > ~1e150): no estimate
  return std::clamp(r, -1.0, 1.0);
}

}  // namespace nightjar::core
