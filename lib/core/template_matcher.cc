#include "core/template_matcher.h"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <limits>

#include "core/dtw.h"

namespace nightjar::core {

namespace {

constexpr double kInf = std::numeric_limits<double>::infinity();

double PopulationSpread(const std::vector<double>& x) {
  double mean = 0.0;
  for (const double v : x) mean += v;
  mean /= static_cast<double>(x.size());
  double ss = 0.0;
  for (const double v : x) ss += (v - mean) * (v - mean);
  return std::sqrt(ss / static_cast<double>(x.size()));
}

int EffectiveBand(const EventTemplate& t) {
  if (t.band >= 0) return t.band;
  return std::max(1, static_cast<int>(t.shape.size() / 10));
}

}  // namespace

Status ValidateEventTemplate(const EventTemplate& t) {
  if (t.name.empty()) return Status::InvalidArgument("name: must not be empty");
  if (t.shape.size() < 4) return Status::InvalidArgument("shape: needs at least 4 values");
  if (t.shape.size() > 100'000) {
    return Status::InvalidArgument("shape: at most 100000 values");
  }
  for (const double v : t.shape) {
    if (!std::isfinite(v)) return Status::InvalidArgument("shape: values must be finite");
  }
  if (PopulationSpread(t.shape) <= 0.0) {
    return Status::InvalidArgument("shape: a flat shape cannot be matched by its form");
  }
  if (t.band >= static_cast<int>(t.shape.size())) {
    return Status::InvalidArgument("band: must be shorter than the shape");
  }
  if (!(t.max_distance > 0.0 && t.max_distance < 2.0)) {
    return Status::InvalidArgument("max_distance: must be in (0, 2)");
  }
  if (!(t.min_spread_ratio >= 0.0)) {
    return Status::InvalidArgument("min_spread_ratio: must be >= 0");
  }
  return Status::Ok();
}

TemplateMatcher::TemplateMatcher(const EventTemplate& t)
    : name_(t.name),
      template_(t.shape.size()),
      upper_(t.shape.size()),
      lower_(t.shape.size()),
      window_(t.shape.size(), 0.0),
      normalised_(t.shape.size()),
      rows_(2 * t.shape.size()),
      band_(EffectiveBand(t)),
      max_distance_(t.max_distance),
      min_spread_(t.min_spread_ratio * PopulationSpread(t.shape)),
      last_distance_(kInf) {
  assert(ValidateEventTemplate(t).ok());
  const bool normalised = ZNormalize(t.shape, template_, 0.0);
  assert(normalised);
  (void)normalised;
  KeoghEnvelope(template_, band_, upper_, lower_);
}

std::size_t TemplateMatcher::MemoryBytes() const {
  return name_.capacity() + (template_.capacity() + upper_.capacity() + lower_.capacity() +
                             window_.capacity() + normalised_.capacity() + rows_.capacity()) *
                                sizeof(double);
}

void TemplateMatcher::Reset() {
  next_ = 0;
  filled_ = 0;
  quiet_ = 0;
  last_distance_ = kInf;
}

std::optional<TemplateMatch> TemplateMatcher::Add(double value) {
  const std::size_t m = template_.size();
  last_distance_ = kInf;
  if (!std::isfinite(value)) {
    Reset();  // a hole in the window breaks the shape
    return std::nullopt;
  }
  window_[next_] = value;
  next_ = (next_ + 1) % m;
  filled_ = std::min(filled_ + 1, m);
  if (quiet_ > 0) --quiet_;
  if (filled_ < m || quiet_ > 0) return std::nullopt;

  // Oldest sample first.
  for (std::size_t k = 0; k < m; ++k) normalised_[k] = window_[(next_ + k) % m];
  if (!ZNormalize(normalised_, normalised_, min_spread_)) return std::nullopt;

  const double limit_squared = max_distance_ * max_distance_ * static_cast<double>(m);
  const double bound = LbKeogh(normalised_, upper_, lower_);
  if (bound * bound > limit_squared) return std::nullopt;
  const double distance =
      DtwDistance(normalised_, template_, DtwCost::kSquared, band_, rows_, limit_squared);
  if (!std::isfinite(distance)) return std::nullopt;
  last_distance_ = distance / std::sqrt(static_cast<double>(m));
  if (last_distance_ > max_distance_) return std::nullopt;
  quiet_ = static_cast<std::int64_t>(m);
  return TemplateMatch{.distance = last_distance_, .length = static_cast<std::int64_t>(m)};
}

}  // namespace nightjar::core
