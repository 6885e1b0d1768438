#include "core/residual_scale.h"

#include <algorithm>
#include <cmath>
#include <numbers>

namespace nightjar::core {

namespace {
// E|X| = sigma * sqrt(2/pi) for X ~ N(0, sigma^2).
const double kMeanAbsToSigma = std::sqrt(std::numbers::pi / 2.0);
}  // namespace

ResidualScale::ResidualScale(double alpha, double floor, double clip)
    : alpha_(alpha), floor_(floor), clip_(clip) {}

void ResidualScale::Update(double residual) {
  if (!std::isfinite(residual)) return;
  double magnitude = std::abs(residual);
  // Clip only once the estimate rests on enough samples to be trusted.
  if (settled()) magnitude = std::min(magnitude, clip_ * sigma());
  ++count_;
  const double weight = std::max(alpha_, 1.0 / static_cast<double>(count_));
  mean_abs_ += weight * (magnitude - mean_abs_);
}

double ResidualScale::sigma() const { return std::max(mean_abs_ * kMeanAbsToSigma, floor_); }

}  // namespace nightjar::core
