// The live counters behind the metrics endpoint that the worker threads update: a
// latency histogram with fixed buckets, alerts by kind and channels by state.
//
// Updates are relaxed atomic increments (no lock, no allocation); a snapshot reads each
// atomic once, so a scrape during updates may see one bucket a sample ahead of another,
// but the histogram's count is the sum of the buckets it read (the +Inf bucket and the
// count always agree).
//
// Thread-safety: Record/increments from any thread, Snapshot from any thread.
// Ownership: plain atomics, owned by whoever holds the struct (one per EngineWorker).
#pragma once

#include <array>
#include <atomic>
#include <cstddef>
#include <cstdint>

#include "service/metrics_text.h"

namespace nightjar::service {

// Upper bounds in seconds: 50 us to 1 s, about 2.5x apart.
inline constexpr std::array<double, 13> kLatencyBoundsSeconds = {
    50e-6, 100e-6, 250e-6, 500e-6, 1e-3, 2.5e-3, 5e-3, 10e-3, 25e-3, 50e-3, 100e-3, 250e-3, 1.0};

class LatencyHistogram {
 public:
  void Record(std::int64_t nanoseconds) {
    const std::int64_t ns = nanoseconds < 0 ? 0 : nanoseconds;
    const double seconds = static_cast<double>(ns) * 1e-9;
    std::size_t bucket = 0;
    while (bucket < kLatencyBoundsSeconds.size() && seconds > kLatencyBoundsSeconds[bucket]) {
      ++bucket;
    }
    counts_[bucket].fetch_add(1, std::memory_order_relaxed);
    sum_ns_.fetch_add(static_cast<std::uint64_t>(ns), std::memory_order_relaxed);
  }

  // Adds this histogram's buckets and sum into `out` (sized here when empty).
  void AddTo(HistogramSnapshot& out) const {
    if (out.counts.empty()) {
      out.upper_bounds.assign(kLatencyBoundsSeconds.begin(), kLatencyBoundsSeconds.end());
      out.counts.assign(counts_.size(), 0);
    }
    for (std::size_t i = 0; i < counts_.size(); ++i) {
      out.counts[i] += counts_[i].load(std::memory_order_relaxed);
    }
    out.sum += static_cast<double>(sum_ns_.load(std::memory_order_relaxed)) * 1e-9;
  }

 private:
  std::array<std::atomic<std::uint64_t>, kLatencyBoundsSeconds.size() + 1> counts_{};
  std::atomic<std::uint64_t> sum_ns_{0};
};

struct WorkerMetrics {
  LatencyHistogram latency;
  std::array<std::atomic<std::uint64_t>, kAlertKindCount> alerts_by_kind{};
  std::array<std::atomic<std::int64_t>, kChannelStateCount> channels_by_state{};
};

}  // namespace nightjar::service
