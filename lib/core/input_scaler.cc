#include "core/input_scaler.h"

#include <algorithm>
#include <cmath>

namespace nightjar::core {

InputScaler::InputScaler(const InputScalerOptions& options) : options_(options) {}

void InputScaler::Learn(double value) {
  ++learnt_;
  if (!frozen_) {
    warmup_moments_.Add(value);
    mean_ = warmup_moments_.mean();
    variance_ = warmup_moments_.count() > 1 ? warmup_moments_.variance() : 0.0;
  } else if (options_.adapt_alpha > 0.0) {
    // Exponentially weighted mean/variance (Finch 2009 recursion), seeded by warm-up.
    const double alpha = options_.adapt_alpha;
    const double delta = value - mean_;
    mean_ += alpha * delta;
    variance_ = (1.0 - alpha) * (variance_ + alpha * delta * delta);
  } else {
    return;
  }
  RefreshScale(std::sqrt(variance_));
}

void InputScaler::RefreshScale(double stddev) {
  const double floor =
      options_.min_scale > 0.0 ? options_.min_scale : std::max(1e-4 * std::abs(mean_), 1e-9);
  scale_ = std::max(stddev, floor);
}

double InputScaler::Scale(double value) const {
  return std::clamp((value - mean_) / scale_, -kMaxScaled, kMaxScaled);
}

}  // namespace nightjar::core
