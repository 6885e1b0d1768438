#include "core/sample_period.h"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <cstddef>
#include <string>

namespace nightjar::core {
namespace {

// Enough for a robust median; more only delays the estimate and costs memory per channel.
constexpr int kMaxLearnIntervals = 4096;

}  // namespace

Status ValidateSamplePeriodOptions(const SamplePeriodOptions& options) {
  if (options.learn_intervals < 1 || options.learn_intervals > kMaxLearnIntervals) {
    return Status::InvalidArgument("learn_intervals: must be in [1, 4096], got " +
                                   std::to_string(options.learn_intervals));
  }
  if (!(std::isfinite(options.configured_period_s) && options.configured_period_s >= 0.0)) {
    return Status::InvalidArgument("configured_period_s: must be finite and >= 0 (0 = none), got " +
                                   std::to_string(options.configured_period_s));
  }
  return Status::Ok();
}

SamplePeriod::SamplePeriod(const SamplePeriodOptions& options) : options_(options) {
  assert(ValidateSamplePeriodOptions(options).ok());
  const SamplePeriodOptions defaults;
  if (options_.learn_intervals < 1 || options_.learn_intervals > kMaxLearnIntervals) {
    options_.learn_intervals = defaults.learn_intervals;
  }
  if (!(std::isfinite(options_.configured_period_s) && options_.configured_period_s >= 0.0)) {
    options_.configured_period_s = defaults.configured_period_s;
  }
  configured_ = options_.configured_period_s > 0.0;
  intervals_.resize(static_cast<std::size_t>(options_.learn_intervals));
}

void SamplePeriod::Add(TimestampUs t) {
  ++samples_;
  if (!last_) {
    last_ = t;
    return;
  }
  if (t == *last_) {
    ++duplicates_;
    return;
  }
  if (t < *last_) {
    ++backward_jumps_;
    last_ = t;  // re-anchor: a reset clock is measured from its new origin
    return;
  }
  const TimestampUs interval = t - *last_;
  last_ = t;
  if (estimate_known()) return;  // frozen
  intervals_[static_cast<std::size_t>(intervals_seen_)] = interval;
  ++intervals_seen_;
  if (estimate_known()) {
    estimate_s_ = MedianSeconds();
    std::vector<TimestampUs>().swap(intervals_);  // frees the buffer; not an allocation
  }
}

double SamplePeriod::MedianSeconds() {
  const auto n = static_cast<std::ptrdiff_t>(intervals_seen_);
  const auto begin = intervals_.begin();
  const auto mid = begin + n / 2;
  std::nth_element(begin, mid, begin + n);
  const double upper = ToSeconds(*mid);
  if (n % 2 == 1) return upper;
  // Even count: average with the largest of the lower half, which nth_element left there.
  const double lower = ToSeconds(*std::max_element(begin, mid));
  return 0.5 * (lower + upper);
}

}  // namespace nightjar::core
