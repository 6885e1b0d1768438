// ReportTrace: the per-sample trace of a replay (replay_runner.h TracePoint) kept in
// bounded memory for the report page (report_html.h).
//
// Each channel's samples go into time buckets as they arrive. A bucket keeps the sample
// with the lowest value and the one with the highest (with their expected value and
// band), and the largest chart ratio seen in it, so spikes in the value and in the ratio
// survive. Buckets start one second wide; when a channel holds more than twice
// `buckets` of them, neighbours are merged pairwise and the width doubles. So a channel
// never keeps more than 2 * buckets buckets (4 * buckets points), however long the
// recording: memory is O(channels * buckets), not O(samples).
//
// Samples the engine did not use (TracePoint::used false) are left out. While a channel
// is learning it has no forecast: expected, band and ratio are NaN (drawn as gaps).
//
// Thread-safety: none; one owner thread. Ownership: owns its buckets; Channels() returns
// values.
#pragma once

#include <cstddef>
#include <cstdint>
#include <span>
#include <string>
#include <vector>

#include "core/time.h"
#include "replay/replay_runner.h"
#include "replay/report_html.h"

namespace nightjar::replay {

class ReportTrace {
 public:
  // `buckets` >= 1 (clamped): the target per channel.
  explicit ReportTrace(std::size_t buckets = 1000);

  // Adds one sample; allocates only when a column is first seen or a bucket is opened.
  void Add(const TracePoint& point);

  // One report channel per name (column order), in time order, band = 3 residual
  // sigma; a column without samples gets empty traces.
  std::vector<ReportChannel> Channels(std::span<const std::string> names) const;

  // Width of the channel's buckets now, microseconds (0 for an unknown column).
  core::TimestampUs bucket_width(std::size_t channel) const;
  // Buckets the channel holds now.
  std::size_t bucket_count(std::size_t channel) const;

 private:
  struct Extreme {
    core::TimestampUs time = 0;
    double value = 0.0;
    double expected = 0.0;
    double band = 0.0;
  };
  struct Bucket {
    std::int64_t index = 0;  // (time - origin) / width
    Extreme low;
    Extreme high;
    double ratio = 0.0;  // largest finite ratio; NaN if none
  };
  struct Channel {
    core::TimestampUs origin = 0;
    core::TimestampUs width = core::kMicrosPerSecond;
    std::vector<Bucket> buckets;
  };
  static void Merge(Bucket& into, const Bucket& from);
  void Halve(Channel& channel) const;

  std::size_t max_buckets_;
  std::vector<Channel> channels_;
};

}  // namespace nightjar::replay
