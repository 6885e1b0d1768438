#include "core/threshold_design.h"

#include <cmath>
#include <string>

#include "core/arl_design.h"
#include "core/time.h"

namespace nightjar::core {

namespace {
constexpr double kChartsSharingBudget = 3.0;
}  // namespace

Status ValidateThresholdOptions(const ThresholdOptions& options) {
  if (!(options.false_alarms_per_day > 0.0) || !std::isfinite(options.false_alarms_per_day)) {
    return Status::InvalidArgument("thresholds.false_alarms_per_day: must be a number > 0");
  }
  if (!(options.cusum_k > 0.0 && options.cusum_k < 5.0)) {
    return Status::InvalidArgument("thresholds.cusum_k: must be in (0, 5) residual sigmas");
  }
  if (options.cusum_h < 0.0) return Status::InvalidArgument("thresholds.cusum_h: must be >= 0");
  if (!(options.ewma_lambda > 0.0 && options.ewma_lambda <= 1.0)) {
    return Status::InvalidArgument("thresholds.ewma_lambda: must be in (0, 1]");
  }
  if (options.ewma_l < 0.0) return Status::InvalidArgument("thresholds.ewma_l: must be >= 0");
  if (options.spike_limit < 0.0) {
    return Status::InvalidArgument("thresholds.spike_limit: must be >= 0");
  }
  return Status::Ok();
}

double NormalTwoSidedQuantile(double tail) {
  // Bisection on erfc: P(|Z| > z) = erfc(z / sqrt 2). Monotone, 200 halvings reach
  // double precision on [0, 40]; called once per design, so speed does not matter.
  double lo = 0.0;
  double hi = 40.0;
  for (int i = 0; i < 200 && hi - lo > 1e-15; ++i) {
    const double mid = 0.5 * (lo + hi);
    if (std::erfc(mid / std::sqrt(2.0)) > tail) {
      lo = mid;
    } else {
      hi = mid;
    }
  }
  return 0.5 * (lo + hi);
}

Result<Thresholds> ThresholdDesigner::Design(const ThresholdOptions& options,
                                             double sample_period_s) {
  if (Status s = ValidateThresholdOptions(options); !s.ok()) return s;
  if (!(sample_period_s > 0.0) || !std::isfinite(sample_period_s)) {
    return Status::InvalidArgument("sample_period_s: must be > 0 to derive thresholds");
  }
  const double arl0 =
      kChartsSharingBudget * (kSecondsPerDay / sample_period_s) / options.false_alarms_per_day;
  const auto key =
      std::make_tuple(options.cusum_k, options.ewma_lambda, std::lround(std::log10(arl0) * 1000.0));
  Thresholds designed;
  if (auto it = cache_.find(key); it != cache_.end()) {
    designed = it->second;
  } else {
    designed.cusum_k = options.cusum_k;
    designed.ewma_lambda = options.ewma_lambda;
    designed.arl0_per_chart = arl0;
    Result<double> h = CusumThresholdForArl(options.cusum_k, arl0);
    if (!h.ok()) return h.status();
    Result<double> l = EwmaLimitForArl(options.ewma_lambda, arl0);
    if (!l.ok()) return l.status();
    designed.cusum_h = *h;
    designed.ewma_l = *l;
    designed.spike_limit = NormalTwoSidedQuantile(1.0 / arl0);
    cache_.emplace(key, designed);
  }
  if (options.cusum_h > 0.0) designed.cusum_h = options.cusum_h;
  if (options.ewma_l > 0.0) designed.ewma_l = options.ewma_l;
  if (options.spike_limit > 0.0) designed.spike_limit = options.spike_limit;
  return designed;
}

}  // namespace nightjar::core
