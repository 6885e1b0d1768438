// OpenMetrics 1.0 text exposition: the body `GET /metrics` answers with.
//
// OpenMetricsWriter appends metric families to a string in the text format: for each
// family `# TYPE`, `# UNIT` (when given) and `# HELP` lines, then its samples; counters
// are written as `<name>_total`, histograms as cumulative `<name>_bucket{le="..."}` lines
// ending with le="+Inf", then `<name>_sum` and `<name>_count`. Finish() appends `# EOF`.
// Label values and help text are escaped (backslash, double quote, line feed); floating
// values and le thresholds are written in one canonical form (FormatOpenMetricsNumber).
// Names are the caller's: they must match [a-zA-Z_:][a-zA-Z0-9_:]* (asserted).
//
// FormatMetrics() renders a MetricsSnapshot (the daemon's counters) with the nightjar_
// metric names; README "Metrics" lists them.
//
// Thread-safety: pure functions and a writer owned by one thread. Ownership: plain values;
// views passed in are read during the call only.
#pragma once

#include <array>
#include <cstddef>
#include <cstdint>
#include <span>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

namespace nightjar::service {

enum class MetricType { kCounter, kGauge, kHistogram };

// Per-bucket (not cumulative) counts: counts[i] for upper_bounds[i-1] < x <= upper_bounds[i],
// and counts.back() (one more than the bounds) for x above every bound.
struct HistogramSnapshot {
  std::vector<double> upper_bounds;  // strictly increasing, finite
  std::vector<std::uint64_t> counts;
  double sum = 0.0;
};

using MetricLabels = std::span<const std::pair<std::string_view, std::string_view>>;

// Shortest text that reads back as `value`: exponent form (1e-05, 1.1e+23) when the
// decimal exponent is below -4 or at least 6, otherwise fixed with at least one digit
// after the point (0.0001, 1.0, 100000.0); +Inf, -Inf, NaN.
std::string FormatOpenMetricsNumber(double value);

class OpenMetricsWriter {
 public:
  // Starts a family: `name` without any _total/_bucket suffix; `help` "" writes no HELP
  // line; `unit` "" for none (if set, `name` must end with "_<unit>", as the format requires).
  void Family(std::string_view name, MetricType type, std::string_view help,
              std::string_view unit = "");
  // One counter point: <name>_total{labels} value.
  void Counter(std::string_view name, MetricLabels labels, std::uint64_t total);
  void Gauge(std::string_view name, MetricLabels labels, std::int64_t value);
  // <name>_bucket lines (cumulative, then +Inf), <name>_sum, <name>_count.
  void Histogram(std::string_view name, const HistogramSnapshot& histogram);
  // Appends "# EOF\n" and hands the text over; the writer is empty afterwards.
  std::string Finish();

 private:
  void Point(std::string_view name, std::string_view suffix, MetricLabels labels,
             std::string_view value);
  std::string out_;
};

inline constexpr std::size_t kAlertKindCount = 3;     // core::AlertKind
inline constexpr std::size_t kChannelStateCount = 4;  // core::ChannelState

// What the metrics endpoint reports, read from the runtime's atomics.
struct MetricsSnapshot {
  std::uint64_t samples_received = 0;   // samples the intake mapped and parsed
  std::uint64_t samples_processed = 0;  // samples run through an engine
  std::uint64_t samples_dropped = 0;    // refused by a full worker queue
  std::uint64_t drop_holes = 0;         // holes those drops left in channel streams
  std::uint64_t samples_rejected = 0;   // for channels that could not be created
  std::uint64_t bad_payloads = 0;       // messages whose payload did not parse
  std::uint64_t unmapped = 0;           // messages on topics no subscription maps
  std::array<std::uint64_t, kAlertKindCount> alerts_by_kind{};       // by core::AlertKind
  std::array<std::int64_t, kChannelStateCount> channels_by_state{};  // by core::ChannelState
  HistogramSnapshot latency;  // seconds, network thread -> end of engine step
};

std::string FormatMetrics(const MetricsSnapshot& snapshot);

}  // namespace nightjar::service
