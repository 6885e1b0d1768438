#include "replay/report_trace.h"

#include <algorithm>
#include <cmath>
#include <limits>

namespace nightjar::replay {
namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
constexpr double kBandSigmas = 3.0;

}  // namespace

ReportTrace::ReportTrace(std::size_t buckets)
    : max_buckets_(2 * std::max<std::size_t>(buckets, 1)) {}

void ReportTrace::Merge(Bucket& into, const Bucket& from) {
  if (from.low.value < into.low.value) into.low = from.low;
  if (from.high.value > into.high.value) into.high = from.high;
  // fmax ignores a NaN side, so a learning stretch does not hide a later ratio.
  into.ratio = std::fmax(into.ratio, from.ratio);
}

void ReportTrace::Halve(Channel& channel) const {
  std::size_t kept = 0;
  for (std::size_t i = 0; i < channel.buckets.size(); ++i) {
    Bucket bucket = channel.buckets[i];
    bucket.index /= 2;
    if (kept > 0 && channel.buckets[kept - 1].index == bucket.index) {
      Merge(channel.buckets[kept - 1], bucket);
    } else {
      channel.buckets[kept++] = bucket;
    }
  }
  channel.buckets.resize(kept);
  channel.width *= 2;
}

void ReportTrace::Add(const TracePoint& point) {
  if (!point.used) return;
  if (point.channel >= channels_.size()) channels_.resize(point.channel + 1);
  Channel& channel = channels_[point.channel];
  const bool learning = point.state == core::ChannelState::kLearning;
  const Extreme extreme{
      .time = point.time,
      .value = point.value,
      .expected = learning ? kNaN : point.expected,
      .band = learning ? kNaN : kBandSigmas * point.residual_sigma,
  };
  const Bucket fresh{.index = 0,
                     .low = extreme,
                     .high = extreme,
                     .ratio = learning || !std::isfinite(point.ratio) ? kNaN : point.ratio};
  if (channel.buckets.empty()) {
    channel.origin = point.time;
    channel.buckets.push_back(fresh);
    return;
  }
  // Times of used samples only grow; an earlier one would still land in the last bucket.
  const std::int64_t index =
      std::max<std::int64_t>((point.time - channel.origin) / channel.width, 0);
  Bucket& last = channel.buckets.back();
  if (index <= last.index) {
    Merge(last, fresh);
    return;
  }
  Bucket opened = fresh;
  opened.index = index;
  channel.buckets.push_back(opened);
  if (channel.buckets.size() > max_buckets_) Halve(channel);
}

std::vector<ReportChannel> ReportTrace::Channels(std::span<const std::string> names) const {
  std::vector<ReportChannel> out(names.size());
  for (std::size_t c = 0; c < names.size(); ++c) {
    ReportChannel& report = out[c];
    report.name = names[c];
    if (c >= channels_.size()) continue;
    const std::size_t points = 2 * channels_[c].buckets.size();
    report.times.reserve(points);
    report.value.reserve(points);
    report.expected.reserve(points);
    report.band.reserve(points);
    report.ratio.reserve(points);
    const auto emit = [&report](const Extreme& e, double ratio) {
      report.times.push_back(e.time);
      report.value.push_back(e.value);
      report.expected.push_back(e.expected);
      report.band.push_back(e.band);
      report.ratio.push_back(ratio);
    };
    for (const Bucket& bucket : channels_[c].buckets) {
      const bool low_first = bucket.low.time <= bucket.high.time;
      const Extreme& first = low_first ? bucket.low : bucket.high;
      const Extreme& second = low_first ? bucket.high : bucket.low;
      emit(first, bucket.ratio);
      if (second.time != first.time) emit(second, bucket.ratio);
    }
  }
  return out;
}

core::TimestampUs ReportTrace::bucket_width(std::size_t channel) const {
  return channel < channels_.size() ? channels_[channel].width : 0;
}

std::size_t ReportTrace::bucket_count(std::size_t channel) const {
  return channel < channels_.size() ? channels_[channel].buckets.size() : 0;
}

}  // namespace nightjar::replay
