#include "core/cusum_detector.h"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <limits>
#include <string>

namespace nightjar::core {
namespace {

constexpr double kInf = std::numeric_limits<double>::infinity();

bool IsPositiveFinite(double v) { return v > 0.0 && v < kInf; }

}  // namespace

CusumDetector::CusumDetector(double k, double h, double target, double sigma)
    : k_(k), h_(h), target_(target), sigma_(sigma), cap_(kInf) {
  assert(Validate(k, h, target, sigma).ok());
  // Release builds: keep the chart defined rather than propagating NaN.
  if (!(k_ >= 0.0 && k_ < kInf)) k_ = 0.5;
  if (!IsPositiveFinite(h_)) h_ = 5.0;
  if (!std::isfinite(target_)) target_ = 0.0;
  if (!IsPositiveFinite(sigma_)) sigma_ = 1.0;
}

Status CusumDetector::Validate(double k, double h, double target, double sigma) {
  if (!(k >= 0.0 && k < kInf)) {
    return Status::InvalidArgument("cusum k must be >= 0 and finite, got " + std::to_string(k));
  }
  if (!IsPositiveFinite(h)) {
    return Status::InvalidArgument("cusum h must be > 0 and finite, got " + std::to_string(h));
  }
  if (!std::isfinite(target)) {
    return Status::InvalidArgument("cusum target must be finite, got " + std::to_string(target));
  }
  if (!IsPositiveFinite(sigma)) {
    return Status::InvalidArgument("cusum sigma must be > 0 and finite, got " +
                                   std::to_string(sigma));
  }
  return Status::Ok();
}

CusumDetector::Reading CusumDetector::Add(double x) {
  if (!std::isfinite(x)) return reading();
  const double deviation = x - target_;
  const double reference = k_ * sigma_;
  const double ceiling = cap_ * h_ * sigma_;  // +inf when uncapped
  // One increment feeds both C and the run sum, so without a cap they stay bitwise equal.
  const double up = deviation - reference;
  const double down = -deviation - reference;

  upper_ = std::max(0.0, upper_ + up);
  if (upper_ > 0.0) {
    ++upper_run_;
    upper_sum_ += up;
  } else {
    upper_run_ = 0;
    upper_sum_ = 0.0;
  }
  upper_ = std::min(upper_, ceiling);

  lower_ = std::max(0.0, lower_ + down);
  if (lower_ > 0.0) {
    ++lower_run_;
    lower_sum_ += down;
  } else {
    lower_run_ = 0;
    lower_sum_ = 0.0;
  }
  lower_ = std::min(lower_, ceiling);
  return reading();
}

double CusumDetector::ratio() const { return std::max(upper_, lower_) / (h_ * sigma_); }

CusumDetector::Reading CusumDetector::reading() const {
  Reading r;
  const double threshold = h_ * sigma_;
  r.upper = upper_;
  r.lower = lower_;
  r.upper_run = upper_run_;
  r.lower_run = lower_run_;
  r.ratio = ratio();
  r.upper_signal = upper_ / threshold >= 1.0;
  r.lower_signal = lower_ / threshold >= 1.0;
  r.signal = r.upper_signal || r.lower_signal;
  return r;
}

double CusumDetector::ShiftEstimate() const {
  const double reference = k_ * sigma_;
  const bool upper_side = upper_ >= lower_;
  if (upper_side && upper_run_ > 0) {
    return target_ + reference + upper_sum_ / static_cast<double>(upper_run_);
  }
  if (!upper_side && lower_run_ > 0) {
    return target_ - reference - lower_sum_ / static_cast<double>(lower_run_);
  }
  return target_;
}

void CusumDetector::Reset() {
  upper_ = lower_ = 0.0;
  upper_sum_ = lower_sum_ = 0.0;
  upper_run_ = lower_run_ = 0;
}

Status CusumDetector::set_cap(double max_ratio) {
  if (!(max_ratio >= 1.0)) {
    return Status::InvalidArgument("cusum cap (max_ratio) must be >= 1 or +inf, got " +
                                   std::to_string(max_ratio));
  }
  cap_ = max_ratio;
  return Status::Ok();
}

Status CusumDetector::set_sigma(double sigma) {
  if (!IsPositiveFinite(sigma)) {
    return Status::InvalidArgument("cusum sigma must be > 0 and finite, got " +
                                   std::to_string(sigma));
  }
  const double scale = sigma / sigma_;
  upper_ *= scale;
  lower_ *= scale;
  upper_sum_ *= scale;
  lower_sum_ *= scale;
  sigma_ = sigma;
  return Status::Ok();
}

}  // namespace nightjar::core
