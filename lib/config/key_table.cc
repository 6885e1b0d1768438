#include "config/key_table.h"

#include <array>
#include <cassert>
#include <charconv>
#include <cmath>
#include <limits>
#include <string>
#include <system_error>

namespace nightjar::config {
namespace {

constexpr double kInf = std::numeric_limits<double>::infinity();

// Bounds shorthands: closed/open ends as in interval notation.
constexpr Bounds Closed(double lo, double hi) { return {lo, hi, false, false}; }
constexpr Bounds ClosedOpen(double lo, double hi) { return {lo, hi, false, true}; }
constexpr Bounds OpenClosed(double lo, double hi) { return {lo, hi, true, false}; }
constexpr Bounds Open(double lo, double hi) { return {lo, hi, true, true}; }
constexpr Bounds AtLeast(double lo) { return {lo, kInf, false, true}; }  // finite
constexpr Bounds Above(double lo) { return {lo, kInf, true, true}; }     // finite
constexpr Bounds Finite() { return {-kInf, kInf, true, true}; }
constexpr Bounds AnyNumber() { return {-kInf, kInf, false, false}; }  // infinities allowed
constexpr Bounds None() { return {}; }

// One accessor per row: a captureless lambda giving the address of the field.
#define NIGHTJAR_FIELD(member) \
  +[](core::ChannelOptions& o) -> FieldRef { return FieldRef(&o.member); }

// Bounds mirror core's validation (core/engine_options.cc and the Validate functions it
// calls); tests/config/key_table_test.cc checks each bound against it. Cross-field rules
// (warmup_samples >= scaler.warmup_samples, final_learning_rate <= learning_rate,
// hidden_size * window <= 8192, min_value <= max_value, flatline_samples != 1,
// *_alarm.chatter_raises != 1) are left to
// core::ValidateChannelOptions, which the loader runs on every resolved block.
const std::array kKeys = {
    KeySpec{"unit", NIGHTJAR_FIELD(unit), None(), "",
            "engineering unit shown in alert messages, e.g. \"m3/h\""},
    KeySpec{"asset", NIGHTJAR_FIELD(asset), None(), "",
            "asset whose anomaly alarms form one episode with this channel's; \"\" = the "
            "name before its last dot, \"none\" = no grouping"},
    KeySpec{"episode_window_s", NIGHTJAR_FIELD(episode_window_s), Closed(0, 86400), "s",
            "a raise of the asset's other channels this long after the open episode's latest "
            "annunciated raise is annunciated again"},
    KeySpec{"asset_shares_budget", NIGHTJAR_FIELD(asset_shares_budget), None(), "",
            "the false-alarm budgets are the asset's, shared equally among its channels"},
    KeySpec{"sample_period_s", NIGHTJAR_FIELD(sample_period_s), AtLeast(0), "s",
            "nominal sample period; 0 estimates it from arrival times"},
    KeySpec{
        "warmup_samples", NIGHTJAR_FIELD(warmup_samples), AtLeast(2), "samples",
        "samples seen before anomaly alarms arm (state learning), at least scaler.warmup_samples"},
    KeySpec{"time_of_day_features", NIGHTJAR_FIELD(time_of_day_features), None(), "",
            "feed sin/cos of the UTC time of day to the predictor (daily load cycles)"},
    KeySpec{"forecaster", NIGHTJAR_FIELD(forecaster), None(), "",
            "what forecasts the next value: lstm, or last_value (the naive baseline)"},
    KeySpec{"context.from_asset", NIGHTJAR_FIELD(context.from_asset), None(), "",
            "the model takes the changes of its asset's other channels as inputs"},
    KeySpec{"context.max_channels", NIGHTJAR_FIELD(context.max_channels), Closed(0, 64), "channels",
            "most context channels (the asset's first met); 0 = none"},

    KeySpec{"scaler.warmup_samples", NIGHTJAR_FIELD(scaler.warmup_samples), AtLeast(2), "samples",
            "samples learnt by the input scaler before the predictor starts"},
    KeySpec{"scaler.adapt_alpha", NIGHTJAR_FIELD(scaler.adapt_alpha), ClosedOpen(0, 1), "1/sample",
            "per-sample weight of the slow scale update after arming; 0 keeps it fixed"},
    KeySpec{"scaler.min_scale", NIGHTJAR_FIELD(scaler.min_scale), AtLeast(0), "channel unit",
            "smallest input scale; 0 means 1e-4 * |mean|"},

    KeySpec{"predictor.hidden_size", NIGHTJAR_FIELD(predictor.hidden_size), Closed(1, 1024),
            "units", "LSTM hidden units; multiples of 8 (AVX2) or 16 (AVX-512) run fastest"},
    KeySpec{"predictor.window", NIGHTJAR_FIELD(predictor.window), Closed(1, 1024), "samples",
            "truncated-BPTT window; hidden_size * window <= 8192"},
    KeySpec{"predictor.train_every", NIGHTJAR_FIELD(predictor.train_every), AtLeast(1), "samples",
            "one training step every this many learnable samples"},
    KeySpec{"predictor.learning_rate", NIGHTJAR_FIELD(predictor.learning_rate), Above(0), "",
            "initial Adam step size"},
    KeySpec{"predictor.final_learning_rate", NIGHTJAR_FIELD(predictor.final_learning_rate),
            Above(0), "", "steady-state Adam step size; <= learning_rate"},
    KeySpec{"predictor.learning_rate_decay_steps",
            NIGHTJAR_FIELD(predictor.learning_rate_decay_steps), Above(0), "training steps",
            "time constant of the exponential decay from learning_rate to final_learning_rate"},
    KeySpec{"predictor.gradient_clip_norm", NIGHTJAR_FIELD(predictor.gradient_clip_norm), Finite(),
            "", "largest gradient norm before the Adam step; <= 0 disables clipping"},
    KeySpec{"predictor.forget_bias", NIGHTJAR_FIELD(predictor.forget_bias), Finite(), "",
            "added to the forget-gate bias at initialisation so the cell starts by remembering"},

    KeySpec{"residual.scale_alpha", NIGHTJAR_FIELD(residual.scale_alpha), OpenClosed(0, 1),
            "1/sample", "per-sample weight of the robust residual scale estimate"},
    KeySpec{"residual.scale_floor", NIGHTJAR_FIELD(residual.scale_floor), Above(0), "input sd",
            "smallest residual sigma, in input standard deviations"},
    KeySpec{"residual.scale_clip", NIGHTJAR_FIELD(residual.scale_clip), AtLeast(1), "sigma",
            "Huber clipping of the scale update"},
    KeySpec{"residual.autocorrelation_alpha", NIGHTJAR_FIELD(residual.autocorrelation_alpha),
            OpenClosed(0, 1), "1/sample", "per-sample weight of the serial-correlation estimates"},
    KeySpec{"residual.correct_autocorrelation", NIGHTJAR_FIELD(residual.correct_autocorrelation),
            None(), "", "divide each chart's input by its measured variance-inflation factor"},
    KeySpec{"residual.cusum_cap", NIGHTJAR_FIELD(residual.cusum_cap), AtLeast(1), "x cusum_h",
            "CUSUM sums are capped at cusum_cap * h so long alarms clear promptly"},

    KeySpec{"thresholds.false_alarms_per_day", NIGHTJAR_FIELD(thresholds.false_alarms_per_day),
            Above(0), "1/day", "budget of false anomaly alerts per channel per day"},
    KeySpec{"thresholds.cusum_k", NIGHTJAR_FIELD(thresholds.cusum_k), Open(0, 5), "sigma",
            "CUSUM reference value k (detects shifts near 2k fastest)"},
    KeySpec{"thresholds.cusum_h", NIGHTJAR_FIELD(thresholds.cusum_h), AtLeast(0), "sigma",
            "CUSUM decision interval h; 0 derives it from the budget"},
    KeySpec{"thresholds.ewma_lambda", NIGHTJAR_FIELD(thresholds.ewma_lambda), OpenClosed(0, 1), "",
            "EWMA smoothing weight lambda"},
    KeySpec{"thresholds.ewma_l", NIGHTJAR_FIELD(thresholds.ewma_l), AtLeast(0), "sigma_z",
            "EWMA limit multiplier L; 0 derives it from the budget"},
    KeySpec{"thresholds.spike_limit", NIGHTJAR_FIELD(thresholds.spike_limit), AtLeast(0), "sigma",
            "individual-residual spike limit; 0 derives it from the budget"},

    KeySpec{"level.enabled", NIGHTJAR_FIELD(level.enabled), None(), "",
            "chart the departure from the learnt level besides the forecast residual"},
    KeySpec{"level.baseline_alpha", NIGHTJAR_FIELD(level.baseline_alpha), OpenClosed(0, 1),
            "1/sample", "per-sample weight of the learnt level (it learns only while in control)"},
    KeySpec{"level.false_alarms_per_day", NIGHTJAR_FIELD(level.false_alarms_per_day), Above(0),
            "1/day", "budget of false level alerts per channel per day"},

    KeySpec{"resume.hold_samples", NIGHTJAR_FIELD(resume.hold_samples), AtLeast(0), "samples",
            "after a restart, a gap or a new time line, anomaly alarms wait this long while the "
            "level is compared with the learnt one; 0 = no wait, no check"},
    KeySpec{"resume.relearn_beyond_sd", NIGHTJAR_FIELD(resume.relearn_beyond_sd), Above(0),
            "learnt sd",
            "a mean level over the wait this far from the learnt mean is a new operating point: "
            "the channel re-learns"},
    KeySpec{"resume.relearn_after_s", NIGHTJAR_FIELD(resume.relearn_after_s), AtLeast(0), "s",
            "the level check follows only holes longer than this (or a new time line); after "
            "a shorter one a level far off raises"},
    KeySpec{"resume.relearn_samples", NIGHTJAR_FIELD(resume.relearn_samples), AtLeast(2), "samples",
            "samples a re-learning channel learns before it arms again (at least "
            "scaler.warmup_samples)"},
    KeySpec{"resume.relearn_with_asset", NIGHTJAR_FIELD(resume.relearn_with_asset), None(), "",
            "re-learn with the asset when another of its channels re-learns at the same resume"},

    KeySpec{"sensor.min_value", NIGHTJAR_FIELD(sensor.min_value), AnyNumber(), "channel unit",
            "instrument span, low end; below it is out of range; -.inf = no bound"},
    KeySpec{"sensor.max_value", NIGHTJAR_FIELD(sensor.max_value), AnyNumber(), "channel unit",
            "instrument span, high end; above it is out of range; .inf = no bound"},
    KeySpec{"sensor.flatline_samples", NIGHTJAR_FIELD(sensor.flatline_samples), AtLeast(0),
            "samples", "consecutive unchanged samples that make a flatline; 0 = off, else >= 2"},
    KeySpec{"sensor.flatline_tolerance", NIGHTJAR_FIELD(sensor.flatline_tolerance), AtLeast(0),
            "channel unit", "a sample within this of the run's first value counts as unchanged"},
    KeySpec{"sensor.gap_periods", NIGHTJAR_FIELD(sensor.gap_periods), Above(1), "sample periods",
            "no sample for longer than this many periods is a gap"},

    KeySpec{"anomaly_alarm.on_delay_s", NIGHTJAR_FIELD(anomaly_alarm.on_delay_s), Closed(0, 86400),
            "s",
            "anomaly must persist this long before the alarm raises (ISA-18.2 starting value)"},
    KeySpec{"anomaly_alarm.off_delay_s", NIGHTJAR_FIELD(anomaly_alarm.off_delay_s),
            Closed(0, 86400), "s", "anomaly must stay below the clear level this long to clear"},
    KeySpec{"anomaly_alarm.deadband", NIGHTJAR_FIELD(anomaly_alarm.deadband), ClosedOpen(0, 1),
            "of threshold", "clear when statistic/threshold < 1 - deadband"},
    KeySpec{"anomaly_alarm.max_shelve_s", NIGHTJAR_FIELD(anomaly_alarm.max_shelve_s),
            OpenClosed(0, 2592000), "s", "longest shelving one request may ask for"},
    KeySpec{"anomaly_alarm.chatter_raises", NIGHTJAR_FIELD(anomaly_alarm.chatter_raises),
            Closed(0, 16), "raises",
            "this many raises within chatter_window_s make the alarm chattering: "
            "its clear then waits chatter_window_s; 0 = off, else >= 2"},
    KeySpec{"anomaly_alarm.chatter_window_s", NIGHTJAR_FIELD(anomaly_alarm.chatter_window_s),
            OpenClosed(0, 86400), "s",
            "window of the chattering count, and the quiet time a "
            "chattering alarm needs to clear"},

    KeySpec{"sensor_alarm.on_delay_s", NIGHTJAR_FIELD(sensor_alarm.on_delay_s), Closed(0, 86400),
            "s", "sensor fault must persist this long before the alarm raises"},
    KeySpec{"sensor_alarm.off_delay_s", NIGHTJAR_FIELD(sensor_alarm.off_delay_s), Closed(0, 86400),
            "s", "sensor must stay healthy this long before the alarm clears"},
    KeySpec{"sensor_alarm.deadband", NIGHTJAR_FIELD(sensor_alarm.deadband), ClosedOpen(0, 1),
            "of threshold", "clear when statistic/threshold < 1 - deadband"},
    KeySpec{"sensor_alarm.max_shelve_s", NIGHTJAR_FIELD(sensor_alarm.max_shelve_s),
            OpenClosed(0, 2592000), "s", "longest shelving one request may ask for"},
    KeySpec{"sensor_alarm.chatter_raises", NIGHTJAR_FIELD(sensor_alarm.chatter_raises),
            Closed(0, 16), "raises",
            "this many raises within chatter_window_s make the alarm chattering: "
            "its clear then waits chatter_window_s; 0 = off, else >= 2"},
    KeySpec{"sensor_alarm.chatter_window_s", NIGHTJAR_FIELD(sensor_alarm.chatter_window_s),
            OpenClosed(0, 86400), "s",
            "window of the chattering count, and the quiet time a "
            "chattering alarm needs to clear"},

    KeySpec{"events", NIGHTJAR_FIELD(events), None(), "",
            "expected events recognised by their shape; a block that sets it replaces the list"},
    KeySpec{"event_priority", NIGHTJAR_FIELD(event_priority), None(), "",
            "priority of event alerts: low, medium or high"},
    KeySpec{"anomaly_priority", NIGHTJAR_FIELD(anomaly_priority), None(), "",
            "priority of anomaly alerts: low, medium or high"},
    KeySpec{"sensor_priority", NIGHTJAR_FIELD(sensor_priority), None(), "",
            "priority of sensor alerts: low, medium or high"},
};

#define NIGHTJAR_EVENT_FIELD(member) \
  +[](core::EventTemplate& e) -> EventFieldRef { return EventFieldRef(&e.member); }

// Bounds mirror core::ValidateEventTemplate, which the loader runs on every entry (it also
// checks that the shape is not flat and that band is shorter than the shape).
const std::array kEventKeys = {
    EventKeySpec{"name", NIGHTJAR_EVENT_FIELD(name), None(), "",
                 "name shown in event alerts, e.g. \"pump_start\"", true},
    EventKeySpec{"shape", NIGHTJAR_EVENT_FIELD(shape), Finite(), "channel unit",
                 "the expected shape, one value per sample, 4 to 100000 values", true},
    EventKeySpec{"band", NIGHTJAR_EVENT_FIELD(band), Finite(), "samples",
                 "Sakoe-Chiba band of the DTW match; negative = 10 % of the shape length"},
    EventKeySpec{"max_distance", NIGHTJAR_EVENT_FIELD(max_distance), Open(0, 2), "",
                 "largest per-sample DTW distance that counts as a match (0.5 ~ r >= 0.875)"},
    EventKeySpec{"min_spread_ratio", NIGHTJAR_EVENT_FIELD(min_spread_ratio), AtLeast(0), "",
                 "windows with less than this fraction of the shape's spread are skipped"},
};

#undef NIGHTJAR_FIELD
#undef NIGHTJAR_EVENT_FIELD

std::string FormatNumber(double x) {
  if (std::isinf(x)) return x > 0 ? ".inf" : "-.inf";
  if (std::isnan(x)) return ".nan";
  char buffer[64];
  const auto [end, ec] = std::to_chars(buffer, buffer + sizeof buffer, x);
  assert(ec == std::errc());
  return std::string(buffer, end);
}

std::string FormatEvent(const core::EventTemplate& event);

std::string QuoteString(std::string_view s) {
  std::string out = "\"";
  for (const char c : s) {
    switch (c) {
      case '"':
        out += "\\\"";
        break;
      case '\\':
        out += "\\\\";
        break;
      case '\n':
        out += "\\n";
        break;
      case '\t':
        out += "\\t";
        break;
      default:
        out += c;
    }
  }
  return out + "\"";
}

}  // namespace

bool Bounds::Contains(double x) const {
  if (std::isnan(x)) return false;
  const bool above_lo = lo_open ? x > lo : x >= lo;
  const bool below_hi = hi_open ? x < hi : x <= hi;
  return above_lo && below_hi;
}

std::string Bounds::Describe() const {
  const bool lo_none = lo == -kInf;
  const bool hi_none = hi == kInf;
  if (lo_none && hi_none) {
    return lo_open && hi_open ? "a finite number" : "any number (.inf and -.inf allowed)";
  }
  // Built by append: GCC 12 -O3 warns (-Wrestrict, a false positive) on const char* + string.
  std::string out;
  if (hi_none) return out.append(lo_open ? "> " : ">= ").append(FormatNumber(lo));
  if (lo_none) return out.append(hi_open ? "< " : "<= ").append(FormatNumber(hi));
  return out.append(lo_open ? "(" : "[")
      .append(FormatNumber(lo))
      .append(", ")
      .append(FormatNumber(hi))
      .append(hi_open ? ")" : "]");
}

ValueType KeySpec::type() const {
  core::ChannelOptions probe;
  return static_cast<ValueType>(field(probe).index());
}

std::string_view KeySpec::section() const {
  const std::size_t dot = path.find('.');
  return dot == std::string_view::npos ? std::string_view() : path.substr(0, dot);
}

std::string_view KeySpec::name() const {
  const std::size_t dot = path.find('.');
  return dot == std::string_view::npos ? path : path.substr(dot + 1);
}

std::span<const KeySpec> ChannelKeys() { return kKeys; }

const KeySpec* FindKey(std::string_view path) {
  for (const KeySpec& key : kKeys) {
    if (key.path == path) return &key;
  }
  return nullptr;
}

Value GetValue(const KeySpec& key, const core::ChannelOptions& options) {
  // The accessor only takes an address; nothing is written through it here.
  const FieldRef ref = key.field(const_cast<core::ChannelOptions&>(options));
  return std::visit([](auto* field) { return Value(*field); }, ref);
}

void SetValue(const KeySpec& key, const Value& value, core::ChannelOptions& options) {
  const FieldRef ref = key.field(options);
  assert(ref.index() == value.index());
  std::visit(
      [&value](auto* field) {
        using T = std::remove_pointer_t<decltype(field)>;
        if (const T* v = std::get_if<T>(&value)) *field = *v;
      },
      ref);
}

bool SameChannelOptions(const core::ChannelOptions& a, const core::ChannelOptions& b) {
  for (const KeySpec& key : kKeys) {
    // FormatValue is exact (round-trip doubles) and covers the event lists, which have
    // no operator==.
    if (FormatValue(GetValue(key, a)) != FormatValue(GetValue(key, b))) return false;
  }
  return true;
}

Value DefaultValue(const KeySpec& key) { return GetValue(key, core::ChannelOptions{}); }

std::string FormatValue(const Value& value) {
  struct Formatter {
    std::string operator()(const std::string& s) const { return QuoteString(s); }
    std::string operator()(bool b) const { return b ? "true" : "false"; }
    std::string operator()(int i) const { return std::to_string(i); }
    std::string operator()(double d) const { return FormatNumber(d); }
    std::string operator()(core::Priority p) const { return core::PriorityName(p); }
    std::string operator()(core::Forecaster f) const { return core::ForecasterName(f); }
    std::string operator()(const std::vector<core::EventTemplate>& events) const {
      std::string out = "[";
      for (std::size_t i = 0; i < events.size(); ++i) {
        out.append(i == 0 ? "" : ", ").append(FormatEvent(events[i]));
      }
      return out + "]";
    }
    std::string operator()(const std::vector<double>& values) const {
      std::string out = "[";
      for (std::size_t i = 0; i < values.size(); ++i) {
        out.append(i == 0 ? "" : ", ").append(FormatNumber(values[i]));
      }
      return out + "]";
    }
  };
  return std::visit(Formatter{}, value);
}

std::optional<core::Forecaster> ParseForecaster(std::string_view text) {
  for (const core::Forecaster f : {core::Forecaster::kLstm, core::Forecaster::kLastValue}) {
    if (text == core::ForecasterName(f)) return f;
  }
  return std::nullopt;
}

ValueType EventKeySpec::type() const {
  core::EventTemplate probe;
  switch (field(probe).index()) {
    case 0:
      return ValueType::kString;
    case 1:
      return ValueType::kInt;
    case 2:
      return ValueType::kDouble;
    default:
      return ValueType::kNumberList;
  }
}

std::span<const EventKeySpec> EventTemplateKeys() { return kEventKeys; }

const EventKeySpec* FindEventKey(std::string_view name) {
  for (const EventKeySpec& key : kEventKeys) {
    if (key.name == name) return &key;
  }
  return nullptr;
}

void SetEventValue(const EventKeySpec& key, const Value& value, core::EventTemplate& event) {
  std::visit(
      [&value](auto* field) {
        using T = std::remove_pointer_t<decltype(field)>;
        const T* v = std::get_if<T>(&value);
        assert(v != nullptr);
        if (v != nullptr) *field = *v;
      },
      key.field(event));
}

Value DefaultEventValue(const EventKeySpec& key) {
  core::EventTemplate event;
  return std::visit([](auto* field) { return Value(*field); }, key.field(event));
}

namespace {

std::string FormatEvent(const core::EventTemplate& event) {
  std::string out = "{";
  for (const EventKeySpec& key : kEventKeys) {
    core::EventTemplate copy = event;
    const Value v = std::visit([](auto* field) { return Value(*field); }, key.field(copy));
    out.append(out.size() == 1 ? "" : ", ").append(key.name).append(": ").append(FormatValue(v));
  }
  return out + "}";
}

}  // namespace

std::optional<core::Priority> ParsePriority(std::string_view text) {
  for (const core::Priority p :
       {core::Priority::kLow, core::Priority::kMedium, core::Priority::kHigh}) {
    if (text == core::PriorityName(p)) return p;
  }
  return std::nullopt;
}

}  // namespace nightjar::config
