#include "core/ewma_detector.h"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <limits>
#include <string>

namespace nightjar::core {
namespace {

// Below this (1 - lambda)^(2t) no longer changes 1 - decay in double precision.
constexpr double kDecayFlush = 1e-20;

bool IsPositiveFinite(double v) { return v > 0.0 && v < std::numeric_limits<double>::infinity(); }

}  // namespace

EwmaDetector::EwmaDetector(double lambda, double limit_factor, double target, double sigma,
                           bool exact_limits)
    : lambda_(lambda),
      limit_factor_(limit_factor),
      target_(target),
      sigma_(sigma),
      exact_limits_(exact_limits) {
  assert(Validate(lambda, limit_factor, target, sigma).ok());
  // Release builds: keep the chart defined rather than propagating NaN.
  if (!(lambda_ > 0.0)) lambda_ = 1e-6;
  lambda_ = std::min(lambda_, 1.0);
  if (!IsPositiveFinite(limit_factor_)) limit_factor_ = 3.0;
  if (!std::isfinite(target_)) target_ = 0.0;
  if (!IsPositiveFinite(sigma_)) sigma_ = 1.0;
  asymptotic_factor_ = std::sqrt(lambda_ / (2.0 - lambda_));
  z_ = target_;
}

Status EwmaDetector::Validate(double lambda, double limit_factor, double target, double sigma) {
  if (!(lambda > 0.0 && lambda <= 1.0)) {
    return Status::InvalidArgument("ewma lambda must be in (0, 1], got " + std::to_string(lambda));
  }
  if (!IsPositiveFinite(limit_factor)) {
    return Status::InvalidArgument("ewma limit_factor (L) must be > 0 and finite, got " +
                                   std::to_string(limit_factor));
  }
  if (!std::isfinite(target)) {
    return Status::InvalidArgument("ewma target must be finite, got " + std::to_string(target));
  }
  if (!IsPositiveFinite(sigma)) {
    return Status::InvalidArgument("ewma sigma must be > 0 and finite, got " +
                                   std::to_string(sigma));
  }
  return Status::Ok();
}

EwmaDetector::Reading EwmaDetector::Add(double x) {
  if (!std::isfinite(x)) return reading();
  z_ = lambda_ * x + (1.0 - lambda_) * z_;
  ++count_;
  decay_ *= (1.0 - lambda_) * (1.0 - lambda_);
  if (decay_ < kDecayFlush) decay_ = 0.0;
  return reading();
}

double EwmaDetector::half_width() const {
  if (count_ == 0) return 0.0;
  if (!exact_limits_) return asymptotic_half_width();
  return limit_factor_ * sigma_ * asymptotic_factor_ * std::sqrt(1.0 - decay_);
}

double EwmaDetector::asymptotic_half_width() const {
  return limit_factor_ * sigma_ * asymptotic_factor_;
}

double EwmaDetector::ratio() const {
  const double width = half_width();
  if (!(width > 0.0)) return 0.0;
  return std::abs(z_ - target_) / width;
}

EwmaDetector::Reading EwmaDetector::reading() const {
  Reading r;
  const double width = half_width();
  r.statistic = z_;
  r.upper_limit = target_ + width;
  r.lower_limit = target_ - width;
  r.ratio = ratio();
  r.signal = r.ratio >= 1.0;
  return r;
}

void EwmaDetector::Reset() {
  z_ = target_;
  count_ = 0;
  decay_ = 1.0;
}

void EwmaDetector::Reseat() { z_ = target_; }

Status EwmaDetector::set_sigma(double sigma) {
  if (!IsPositiveFinite(sigma)) {
    return Status::InvalidArgument("ewma sigma must be > 0 and finite, got " +
                                   std::to_string(sigma));
  }
  sigma_ = sigma;
  return Status::Ok();
}

Status EwmaDetector::set_target(double target) {
  if (!std::isfinite(target)) {
    return Status::InvalidArgument("ewma target must be finite, got " + std::to_string(target));
  }
  target_ = target;
  Reset();
  return Status::Ok();
}

}  // namespace nightjar::core
