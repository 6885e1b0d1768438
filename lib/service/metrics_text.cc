#include "service/metrics_text.h"

#include <cassert>
#include <charconv>
#include <cmath>
#include <system_error>

#include "core/alert.h"
#include "core/channel_pipeline.h"

namespace nightjar::service {
namespace {

[[maybe_unused]] bool ValidName(std::string_view name) {
  if (name.empty()) return false;
  for (std::size_t i = 0; i < name.size(); ++i) {
    const char c = name[i];
    const bool letter = (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') || c == '_' || c == ':';
    const bool digit = c >= '0' && c <= '9';
    if (!letter && !(digit && i > 0)) return false;
  }
  return true;
}

// Backslash, double quote and line feed escaped, as label values and help text need.
void AppendEscaped(std::string_view text, std::string* out) {
  for (const char c : text) {
    if (c == '\\') {
      out->append("\\\\");
    } else if (c == '"') {
      out->append("\\\"");
    } else if (c == '\n') {
      out->append("\\n");
    } else {
      out->push_back(c);
    }
  }
}

std::string_view TypeName(MetricType type) {
  switch (type) {
    case MetricType::kCounter:
      return "counter";
    case MetricType::kGauge:
      return "gauge";
    case MetricType::kHistogram:
      return "histogram";
  }
  return "unknown";
}

}  // namespace

std::string FormatOpenMetricsNumber(double value) {
  if (std::isnan(value)) return "NaN";
  if (std::isinf(value)) return value > 0 ? "+Inf" : "-Inf";
  char buffer[64];
  // The shortest round-trip digits, in exponent form, tell the decimal exponent.
  const std::to_chars_result sci =
      std::to_chars(buffer, buffer + sizeof buffer, value, std::chars_format::scientific);
  const std::string_view scientific(buffer, static_cast<std::size_t>(sci.ptr - buffer));
  std::string_view exponent_text = scientific.substr(scientific.find('e') + 1);
  if (!exponent_text.empty() && exponent_text.front() == '+') exponent_text.remove_prefix(1);
  int exponent = 0;
  std::from_chars(exponent_text.data(), exponent_text.data() + exponent_text.size(), exponent);
  if (value != 0.0 && (exponent < -4 || exponent >= 6)) return std::string(scientific);
  const std::to_chars_result fixed =
      std::to_chars(buffer, buffer + sizeof buffer, value, std::chars_format::fixed);
  std::string text(buffer, static_cast<std::size_t>(fixed.ptr - buffer));
  if (text.find('.') == std::string::npos) text.append(".0");
  return text;
}

void OpenMetricsWriter::Family(std::string_view name, MetricType type, std::string_view help,
                               std::string_view unit) {
  assert(ValidName(name));
  assert(unit.empty() || (name.size() > unit.size() && name.ends_with(unit) &&
                          name[name.size() - unit.size() - 1] == '_'));
  out_.append("# TYPE ").append(name).append(" ").append(TypeName(type)).append("\n");
  if (!unit.empty()) out_.append("# UNIT ").append(name).append(" ").append(unit).append("\n");
  if (help.empty()) return;
  out_.append("# HELP ").append(name).append(" ");
  AppendEscaped(help, &out_);
  out_.append("\n");
}

void OpenMetricsWriter::Point(std::string_view name, std::string_view suffix, MetricLabels labels,
                              std::string_view value) {
  out_.append(name).append(suffix);
  if (!labels.empty()) {
    out_.push_back('{');
    for (std::size_t i = 0; i < labels.size(); ++i) {
      assert(ValidName(labels[i].first));
      if (i > 0) out_.push_back(',');
      out_.append(labels[i].first).append("=\"");
      AppendEscaped(labels[i].second, &out_);
      out_.push_back('"');
    }
    out_.push_back('}');
  }
  out_.push_back(' ');
  out_.append(value).push_back('\n');
}

void OpenMetricsWriter::Counter(std::string_view name, MetricLabels labels, std::uint64_t total) {
  Point(name, "_total", labels, std::to_string(total));
}

void OpenMetricsWriter::Gauge(std::string_view name, MetricLabels labels, std::int64_t value) {
  Point(name, "", labels, std::to_string(value));
}

void OpenMetricsWriter::Histogram(std::string_view name, const HistogramSnapshot& histogram) {
  assert(histogram.counts.size() == histogram.upper_bounds.size() + 1);
  std::uint64_t cumulative = 0;
  for (std::size_t i = 0; i < histogram.counts.size(); ++i) {
    cumulative += histogram.counts[i];
    const std::string le = i < histogram.upper_bounds.size()
                               ? FormatOpenMetricsNumber(histogram.upper_bounds[i])
                               : std::string("+Inf");
    const std::pair<std::string_view, std::string_view> label{"le", le};
    Point(name, "_bucket", MetricLabels(&label, 1), std::to_string(cumulative));
  }
  Point(name, "_sum", {}, FormatOpenMetricsNumber(histogram.sum));
  Point(name, "_count", {}, std::to_string(cumulative));
}

std::string OpenMetricsWriter::Finish() {
  out_.append("# EOF\n");
  std::string text = std::move(out_);
  out_.clear();
  return text;
}

std::string FormatMetrics(const MetricsSnapshot& s) {
  OpenMetricsWriter w;
  w.Family("nightjar_samples_received", MetricType::kCounter,
           "Samples mapped and parsed by the intake (handed to a worker or dropped)");
  w.Counter("nightjar_samples_received", {}, s.samples_received);
  w.Family("nightjar_samples_processed", MetricType::kCounter, "Samples run through an engine");
  w.Counter("nightjar_samples_processed", {}, s.samples_processed);
  w.Family("nightjar_samples_dropped", MetricType::kCounter,
           "Samples dropped because the owning worker's queue was full");
  w.Counter("nightjar_samples_dropped", {}, s.samples_dropped);
  w.Family("nightjar_drop_holes", MetricType::kCounter,
           "Holes dropped samples left in channel streams (nightjar's own: no gap alarm)");
  w.Counter("nightjar_drop_holes", {}, s.drop_holes);
  w.Family("nightjar_samples_rejected", MetricType::kCounter,
           "Samples of channels that could not be created (bad channel options)");
  w.Counter("nightjar_samples_rejected", {}, s.samples_rejected);
  w.Family("nightjar_payloads_bad", MetricType::kCounter,
           "Messages on a sample topic whose payload did not parse");
  w.Counter("nightjar_payloads_bad", {}, s.bad_payloads);
  w.Family("nightjar_messages_unmapped", MetricType::kCounter,
           "Messages on topics that no subscription maps to a channel");
  w.Counter("nightjar_messages_unmapped", {}, s.unmapped);

  w.Family("nightjar_alerts_published", MetricType::kCounter,
           "Alerts published (raises and clears), by kind");
  for (std::size_t k = 0; k < kAlertKindCount; ++k) {
    const std::pair<std::string_view, std::string_view> label{
        "kind", core::AlertKindName(static_cast<core::AlertKind>(k))};
    w.Counter("nightjar_alerts_published", MetricLabels(&label, 1), s.alerts_by_kind[k]);
  }
  w.Family("nightjar_channels", MetricType::kGauge, "Channels the engines know, by state");
  for (std::size_t k = 0; k < kChannelStateCount; ++k) {
    const std::pair<std::string_view, std::string_view> label{
        "state", core::ChannelStateName(static_cast<core::ChannelState>(k))};
    w.Gauge("nightjar_channels", MetricLabels(&label, 1), s.channels_by_state[k]);
  }
  w.Family("nightjar_sample_latency_seconds", MetricType::kHistogram,
           "Time from a sample's arrival at the network thread to the end of its engine step",
           "seconds");
  w.Histogram("nightjar_sample_latency_seconds", s.latency);
  return w.Finish();
}

}  // namespace nightjar::service
