#include "replay/replay_summary.h"

#include <algorithm>
#include <cinttypes>
#include <cmath>
#include <cstdarg>
#include <cstdio>
#include <utility>

#include "core/alert_json.h"
#include "core/timestamp_format.h"

namespace nightjar::replay {
namespace {

static_assert(static_cast<std::size_t>(core::AlertKind::kSensor) + 1 == kAlertKindCount);
static_assert(static_cast<std::size_t>(core::AlertPhase::kClear) + 1 == kAlertPhaseCount);
static_assert(static_cast<std::size_t>(core::Detector::kLevel) + 1 == kDetectorCount);

constexpr double kSecondsPerHour = 3600.0;

core::AlertKind KindAt(std::size_t i) { return static_cast<core::AlertKind>(i); }
core::Detector DetectorAt(std::size_t i) { return static_cast<core::Detector>(i); }

std::string Timestamp(core::TimestampUs t) {
  return core::FormatUtcTimestamp(t, core::SecondFraction::kMicrosIfAny);
}

// printf into a std::string.
__attribute__((format(printf, 1, 2))) std::string Printf(const char* format, ...) {
  std::va_list args;
  va_start(args, format);
  std::va_list copy;
  va_copy(copy, args);
  const int n = std::vsnprintf(nullptr, 0, format, copy);
  va_end(copy);
  std::string out;
  if (n > 0) {
    out.resize(static_cast<std::size_t>(n) + 1);
    std::vsnprintf(out.data(), out.size(), format, args);
    out.resize(static_cast<std::size_t>(n));
  }
  va_end(args);
  return out;
}

// A small streaming writer for pretty-printed JSON (two-space indent).
class JsonWriter {
 public:
  void BeginObject() { Open('{'); }
  void EndObject() { Close('}'); }
  void BeginArray() { Open('['); }
  void EndArray() { Close(']'); }
  void Key(std::string_view key) {
    Separate();
    core::AppendJsonString(key, &out_);
    out_ += ": ";
    after_key_ = true;
  }
  void String(std::string_view value) {
    Separate();
    core::AppendJsonString(value, &out_);
  }
  void Number(double value) {
    Separate();
    core::AppendJsonNumber(value, &out_);
  }
  void Int(std::int64_t value) {
    Separate();
    out_ += std::to_string(value);
  }
  void Uint(std::uint64_t value) {
    Separate();
    out_ += std::to_string(value);
  }
  void Bool(bool value) {
    Separate();
    out_ += value ? "true" : "false";
  }
  void Null() {
    Separate();
    out_ += "null";
  }
  void Time(std::optional<core::TimestampUs> t) {
    if (t) {
      String(Timestamp(*t));
    } else {
      Null();
    }
  }
  void Field(std::string_view key, std::int64_t value) {
    Key(key);
    Int(value);
  }
  void Field(std::string_view key, double value) {
    Key(key);
    Number(value);
  }
  void Field(std::string_view key, std::string_view value) {
    Key(key);
    String(value);
  }
  void Field(std::string_view key, const char* value) { Field(key, std::string_view(value)); }
  void Field(std::string_view key, bool value) {
    Key(key);
    Bool(value);
  }
  std::string Take() {
    out_ += '\n';
    return std::move(out_);
  }

 private:
  // Before a value or key: a comma after an earlier sibling, then a new indented line.
  void Separate() {
    if (after_key_) {
      after_key_ = false;
      return;
    }
    if (!has_items_.empty()) {
      if (has_items_.back()) out_ += ',';
      has_items_.back() = true;
      NewLine();
    }
  }
  void Open(char bracket) {
    Separate();
    out_ += bracket;
    has_items_.push_back(false);
  }
  void Close(char bracket) {
    const bool had_items = has_items_.back();
    has_items_.pop_back();
    if (had_items) NewLine();
    out_ += bracket;
  }
  void NewLine() {
    out_ += '\n';
    out_.append(2 * has_items_.size(), ' ');
  }

  std::string out_;
  std::vector<bool> has_items_;  // per open container: has it a member yet?
  bool after_key_ = false;
};

void WriteAlertCounts(JsonWriter& json, const AlertCounts& counts) {
  json.Key("alerts");
  json.BeginObject();
  json.Field("raise", counts.raises());
  json.Field("clear", counts.clears());
  for (std::size_t k = 0; k < kAlertKindCount; ++k) {
    json.Key(core::AlertKindName(KindAt(k)));
    json.BeginObject();
    json.Field("raise", counts.by_kind[k][0]);
    json.Field("clear", counts.by_kind[k][1]);
    json.EndObject();
  }
  json.Key("raises_by_detector");
  json.BeginObject();
  for (std::size_t d = 0; d < kDetectorCount; ++d) {
    json.Field(core::DetectorName(DetectorAt(d)), counts.raises_by_detector[d]);
  }
  json.EndObject();
  json.EndObject();
}

void WritePointScores(JsonWriter& json, const PointScores& points) {
  json.BeginObject();
  json.Field("points", points.samples);
  json.Field("excluded", points.excluded);
  json.Field("positives", points.positives);
  json.Field("flagged", points.flagged);
  json.Field("true_positives", points.true_positives);
  json.Field("precision", points.precision());
  json.Field("recall", points.recall());
  json.Field("f1", points.f1());
  json.EndObject();
}

void WriteEventScores(JsonWriter& json, const EventScores& scores) {
  json.BeginObject();
  json.Field("anomaly_windows", scores.windows);
  json.Field("detected", scores.detected);
  json.Field("event_windows", scores.event_windows);
  json.Field("ignored_windows", scores.ignored_windows);
  json.Field("raises", scores.raises);
  json.Field("true_raises", scores.true_raises);
  json.Field("expected_raises", scores.expected_raises);
  json.Field("false_alarms", scores.false_alarms);
  json.Field("precision", scores.precision);
  json.Field("recall", scores.recall);
  json.Field("f1", scores.f1);
  json.Field("false_alarms_per_day", scores.false_alarms_per_day);
  json.Field("mean_delay_s", scores.mean_delay_s);
  json.Key("windows");
  json.BeginArray();
  for (const WindowOutcome& outcome : scores.outcomes) {
    json.BeginObject();
    json.Key("start");
    json.Time(outcome.start);
    json.Key("end");
    json.Time(outcome.end);
    json.Field("detected", outcome.detected);
    json.Field("delay_s", outcome.delay_s);
    json.Key("first_channel");
    if (outcome.detected) {
      json.String(outcome.first_channel);
    } else {
      json.Null();
    }
    json.EndObject();
  }
  json.EndArray();
  json.EndObject();
}

std::string Percent(std::int64_t part, std::int64_t whole) {
  if (whole <= 0) return "n/a";
  return Printf("%.1f %%", 100.0 * static_cast<double>(part) / static_cast<double>(whole));
}

// "12 345 678": thin grouping for long counts in the table.
std::string Grouped(std::int64_t value) {
  std::string digits = std::to_string(value < 0 ? -value : value);
  std::string out;
  const std::size_t n = digits.size();
  for (std::size_t i = 0; i < n; ++i) {
    if (i > 0 && (n - i) % 3 == 0) out += ' ';
    out += digits[i];
  }
  return value < 0 ? "-" + out : out;
}

// A number for the table, "-" when it is not finite (e.g. no delay without a detection).
std::string Number(double value, const char* format) {
  if (!std::isfinite(value)) return "-";
  return Printf(format, value);
}

std::string Hours(double seconds) { return Printf("%.2f h", seconds / kSecondsPerHour); }

std::string Delay(double seconds) {
  if (seconds < 120.0) return Printf("+%.0f s", seconds);
  if (seconds < 7200.0) return Printf("+%.1f min", seconds / 60.0);
  return Printf("+%.2f h", seconds / kSecondsPerHour);
}

}  // namespace

void AlertCounts::Add(const core::Alert& alert) {
  const auto kind = static_cast<std::size_t>(alert.kind);
  const auto phase = static_cast<std::size_t>(alert.phase);
  if (kind >= kAlertKindCount || phase >= kAlertPhaseCount) return;
  ++by_kind[kind][phase];
  const auto detector = static_cast<std::size_t>(alert.detector);
  if (alert.phase == core::AlertPhase::kRaise && detector < kDetectorCount) {
    ++raises_by_detector[detector];
  }
}

std::int64_t AlertCounts::Get(core::AlertKind kind, core::AlertPhase phase) const {
  return by_kind[static_cast<std::size_t>(kind)][static_cast<std::size_t>(phase)];
}

std::int64_t AlertCounts::raises() const {
  std::int64_t n = 0;
  for (const auto& kind : by_kind) n += kind[0];
  return n;
}

std::int64_t AlertCounts::clears() const {
  std::int64_t n = 0;
  for (const auto& kind : by_kind) n += kind[1];
  return n;
}

double ReplaySummary::span_s() const {
  if (!first_time || !last_time) return 0.0;
  return core::ToSeconds(*last_time - *first_time);
}

double ReplaySummary::duration_s() const {
  if (!first_time || !last_time) return 0.0;
  double period_s = 0.0;
  for (const ChannelSummary& channel : channels) {
    if (channel.sample_period_s > 0.0 && (period_s == 0.0 || channel.sample_period_s < period_s)) {
      period_s = channel.sample_period_s;
    }
  }
  return span_s() + period_s;
}

double ReplaySummary::samples_per_s() const {
  return wall_s > 0.0 ? static_cast<double>(samples) / wall_s : 0.0;
}

double ReplaySummary::speedup() const { return wall_s > 0.0 ? duration_s() / wall_s : 0.0; }

const char* AlarmRateRatingName(AlarmRateRating rating) {
  switch (rating) {
    case AlarmRateRating::kUnknown:
      return "unknown";
    case AlarmRateRating::kAcceptable:
      return "acceptable";
    case AlarmRateRating::kManageable:
      return "manageable";
    case AlarmRateRating::kOverload:
      return "overload";
  }
  return "unknown";
}

AlarmRate ComputeAlarmRate(std::span<const core::TimestampUs> raise_times, core::TimestampUs start,
                           core::TimestampUs duration) {
  AlarmRate rate;
  rate.raises = static_cast<std::int64_t>(raise_times.size());
  if (duration < 0) duration = 0;
  rate.hours = core::ToSeconds(duration) / kSecondsPerHour;
  if (duration >= core::kMicrosPerSecond) {
    rate.per_hour = static_cast<double>(rate.raises) / rate.hours;
    rate.rating = rate.per_hour <= kAcceptableAlarmsPerHour   ? AlarmRateRating::kAcceptable
                  : rate.per_hour <= kManageableAlarmsPerHour ? AlarmRateRating::kManageable
                                                              : AlarmRateRating::kOverload;
  }

  // Sliding window: for each raise i as the window's start, count raises j with
  // t[j] < t[i] + window; the two indices only move forward.
  std::size_t j = 0;
  for (std::size_t i = 0; i < raise_times.size(); ++i) {
    j = std::max(j, i);
    while (j < raise_times.size() && raise_times[j] < raise_times[i] + kFloodWindowUs) ++j;
    const auto count = static_cast<std::int64_t>(j - i);
    if (count > rate.worst_window_raises) {
      rate.worst_window_raises = count;
      rate.worst_window_start = raise_times[i];
    }
  }
  rate.flood = rate.worst_window_raises > kFloodAlarms;

  // Fixed periods [start + k * window, start + (k + 1) * window) covering the duration.
  rate.periods = (duration + kFloodWindowUs - 1) / kFloodWindowUs;
  std::size_t i = 0;
  while (i < raise_times.size() && raise_times[i] < start) ++i;
  for (std::int64_t k = 0; k < rate.periods; ++k) {
    const core::TimestampUs period_end = start + (k + 1) * kFloodWindowUs;
    std::int64_t count = 0;
    for (; i < raise_times.size() && raise_times[i] < period_end; ++i) ++count;
    if (count > kFloodAlarms) ++rate.flood_periods;
  }
  return rate;
}

AlarmRate ComputeAlarmRate(const ReplaySummary& summary) {
  std::vector<core::TimestampUs> times;
  times.reserve(summary.raises.size());
  for (const RaiseRecord& raise : summary.raises) {
    if (raise.kind != core::AlertKind::kEvent) times.push_back(raise.time);
  }
  std::sort(times.begin(), times.end());  // already in order; cheap insurance
  return ComputeAlarmRate(times, summary.first_time.value_or(0),
                          core::FromSeconds(summary.duration_s()));
}

LabelScores ScoreAgainstLabels(const ReplaySummary& summary, std::span<const LabelWindow> windows,
                               std::string path, const ScoringOptions& options) {
  LabelScores scores;
  scores.path = std::move(path);
  scores.options = options;
  scores.duration_s = summary.duration_s();
  scores.windows = static_cast<std::int64_t>(windows.size());
  // Detection is the anomaly alarms' job; sensor alarms are data quality (FORMAT.md
  // "Scoring", "Which alarms are scored"); event notices are not alarms at all.
  std::vector<Raise> raises;
  std::vector<Raise> sensor_raises;
  raises.reserve(summary.raises.size());
  for (const RaiseRecord& raise : summary.raises) {
    if (raise.kind == core::AlertKind::kAnomaly) {
      raises.push_back(Raise{raise.time, summary.channels[raise.channel].name, raise.annunciated});
    } else if (raise.kind == core::AlertKind::kSensor) {
      sensor_raises.push_back(Raise{raise.time, summary.channels[raise.channel].name});
    }
  }
  std::vector<std::string> names;
  names.reserve(summary.channels.size());
  for (const ChannelSummary& channel : summary.channels) names.push_back(channel.name);
  scores.table = ScoreEventsByChannel(raises, windows, names, scores.duration_s, options);
  scores.sensor_alarms = ScoreEvents(sensor_raises, windows, scores.duration_s, options);
  scores.detectors.push_back(DetectorScores{"nightjar", scores.table, std::nullopt});
  return scores;
}

std::string ReportToJson(const ReplayReport& report) {
  const ReplaySummary& s = report.summary;
  JsonWriter json;
  json.BeginObject();
  json.Field("input", s.input);
  json.Field("ok", report.status.ok());
  json.Key("error");
  if (report.status.ok()) {
    json.Null();
  } else {
    json.String(report.status.message());
  }
  json.Key("seed");
  json.Uint(s.seed);
  json.Key("start");
  json.Time(s.first_time);
  json.Key("end");
  json.Time(s.last_time);
  json.Field("span_s", s.span_s());
  json.Field("duration_s", s.duration_s());
  json.Field("rows", s.rows);
  json.Field("skipped_rows", s.skipped_rows);
  json.Field("out_of_order_rows", s.out_of_order_rows);
  json.Field("repeated_timestamps", s.repeated_timestamps);
  json.Key("first_skip_reason");
  if (s.first_skip_reason.empty()) {
    json.Null();
  } else {
    json.String(s.first_skip_reason);
  }
  json.Field("samples", s.samples);
  json.Field("empty_cells", s.empty_cells);
  json.Field("rejected_samples", s.rejected_samples);
  json.Field("out_of_order_samples", s.out_of_order_samples);
  json.Field("alert_lines", s.alerts.raises() + s.alerts.clears());
  WriteAlertCounts(json, s.alerts);

  json.Key("channels");
  json.BeginArray();
  for (const ChannelSummary& channel : s.channels) {
    json.BeginObject();
    json.Field("name", channel.name);
    json.Field("state", core::ChannelStateName(channel.final_state));
    json.Field("samples", channel.samples);
    json.Field("rejected", channel.rejected);
    json.Field("out_of_order", channel.out_of_order);
    json.Field("sample_period_s", channel.sample_period_s);
    json.Field("relearns", channel.relearns);
    json.Key("context");
    json.BeginArray();
    for (const std::string& name : channel.context) json.String(name);
    json.EndArray();
    WriteAlertCounts(json, channel.alerts);
    json.EndObject();
  }
  json.EndArray();

  const AlarmRate& rate = report.alarm_rate;
  json.Key("alarm_rate");
  json.BeginObject();
  json.Field("raises", rate.raises);
  json.Field("hours", rate.hours);
  json.Field("per_hour", rate.per_hour);
  json.Field("rating", AlarmRateRatingName(rate.rating));
  json.Field("acceptable_per_hour", kAcceptableAlarmsPerHour);
  json.Field("manageable_per_hour", kManageableAlarmsPerHour);
  json.Field("flood_window_s", core::ToSeconds(kFloodWindowUs));
  json.Field("flood_more_than", kFloodAlarms);
  json.Key("worst_window");
  if (rate.worst_window_raises > 0) {
    json.BeginObject();
    json.Key("start");
    json.Time(rate.worst_window_start);
    json.Key("end");
    json.Time(rate.worst_window_start + kFloodWindowUs);
    json.Field("raises", rate.worst_window_raises);
    json.EndObject();
  } else {
    json.Null();
  }
  json.Field("flood", rate.flood);
  json.Field("periods", rate.periods);
  json.Field("flood_periods", rate.flood_periods);
  json.EndObject();

  json.Key("scores");
  if (report.scores) {
    const LabelScores& scores = *report.scores;
    json.BeginObject();
    json.Field("labels", scores.path);
    json.Field("grace_s", scores.options.grace_s);
    json.Field("duration_s", scores.duration_s);
    json.Field("windows", scores.windows);
    json.Key("overall");
    WriteEventScores(json, scores.table.overall);
    json.Key("channels");
    json.BeginArray();
    for (const ChannelEventScores& channel : scores.table.channels) {
      json.BeginObject();
      json.Field("channel", channel.channel);
      json.Key("scores");
      WriteEventScores(json, channel.scores);
      json.EndObject();
    }
    json.EndArray();
    json.Key("detectors");
    json.BeginArray();
    for (const DetectorScores& row : scores.detectors) {
      json.BeginObject();
      json.Field("detector", row.detector);
      json.Key("overall");
      WriteEventScores(json, row.table.overall);
      json.Key("points");
      if (row.points) {
        WritePointScores(json, *row.points);
      } else {
        json.Null();
      }
      json.EndObject();
    }
    json.EndArray();
    json.Key("sensor_alarms");
    WriteEventScores(json, scores.sensor_alarms);
    json.EndObject();
  } else {
    json.Null();
  }

  // Wall-clock facts last and apart: the only part that differs between runs.
  json.Key("timing");
  json.BeginObject();
  json.Field("wall_s", s.wall_s);
  json.Field("cpu_s", s.cpu_s);
  json.Field("samples_per_s", s.samples_per_s());
  json.Field("speedup", s.speedup());
  json.Field("baselines_wall_s", report.baselines_wall_s);
  json.Field("baselines_cpu_s", report.baselines_cpu_s);
  json.EndObject();
  json.EndObject();
  return json.Take();
}

std::string FormatReportText(const ReplayReport& report) {
  const ReplaySummary& s = report.summary;
  std::string out = "== " + s.input + " ==\n";
  if (!report.status.ok()) out += "stopped early: " + report.status.message() + "\n";
  out += Grouped(s.rows) + " rows, " + Grouped(s.samples) + " samples, " +
         std::to_string(s.channels.size()) + " channels";
  if (s.first_time && s.last_time) {
    out += "; " + Timestamp(*s.first_time) + " to " + Timestamp(*s.last_time) + " (" +
           Hours(s.duration_s()) + ")";
  }
  out += "\n";
  out += Printf("%s empty cells, %s samples rejected (not finite or out of range), %s repeated\n",
                Grouped(s.empty_cells).c_str(), Grouped(s.rejected_samples).c_str(),
                Grouped(s.out_of_order_samples).c_str());
  // A replay that stopped at a bad row has it counted as skipped: not worth a line.
  if (s.skipped_rows > 0 && (report.status.ok() || s.skipped_rows > 1 ||
                             s.first_skip_reason != report.status.message())) {
    out += "skipped " + Grouped(s.skipped_rows) + " bad rows (" + Grouped(s.out_of_order_rows) +
           " out of time order); first: " + s.first_skip_reason + "\n";
  }
  out += Printf("replayed in %.2f s (%.2f s CPU): %s samples/s, %.0fx real time (seed %" PRIu64
                ")\n\n",
                s.wall_s, s.cpu_s, Grouped(static_cast<std::int64_t>(s.samples_per_s())).c_str(),
                s.speedup(), s.seed);

  // Per channel: raises/clears by kind.
  std::size_t width = 7;
  for (const ChannelSummary& channel : s.channels) width = std::max(width, channel.name.size());
  const int w = static_cast<int>(width);
  out += Printf("%-*s  %-8s  %10s  %8s", w, "channel", "state", "samples", "rejected");
  for (std::size_t k = 0; k < kAlertKindCount; ++k) {
    out += Printf("  %13s", (std::string(core::AlertKindName(KindAt(k))) + " up/down").c_str());
  }
  out += '\n';
  const auto row = [&](const std::string& name, const char* state, std::int64_t samples,
                       std::int64_t rejected, const AlertCounts& counts) {
    std::string line = Printf("%-*s  %-8s  %10s  %8s", w, name.c_str(), state,
                              Grouped(samples).c_str(), Grouped(rejected).c_str());
    for (std::size_t k = 0; k < kAlertKindCount; ++k) {
      line += Printf("  %13s", (std::to_string(counts.by_kind[k][0]) + "/" +
                                std::to_string(counts.by_kind[k][1]))
                                   .c_str());
    }
    return line + "\n";
  };
  for (const ChannelSummary& channel : s.channels) {
    out += row(channel.name, core::ChannelStateName(channel.final_state), channel.samples,
               channel.rejected, channel.alerts);
  }
  out += row("total", "", s.samples, s.rejected_samples, s.alerts);

  out += "raises by detector:";
  bool any = false;
  for (std::size_t d = 0; d < kDetectorCount; ++d) {
    if (s.alerts.raises_by_detector[d] == 0) continue;
    out += Printf("%s %s %" PRId64, any ? "," : "", core::DetectorName(DetectorAt(d)),
                  s.alerts.raises_by_detector[d]);
    any = true;
  }
  out += any ? "\n\n" : " none\n\n";

  const AlarmRate& rate = report.alarm_rate;
  out += Printf("alarm rate: %" PRId64 " raises in %.2f h", rate.raises, rate.hours);
  switch (rate.rating) {
    case AlarmRateRating::kUnknown:
      out += ": recording too short for a rate\n";
      break;
    case AlarmRateRating::kAcceptable:
      out += Printf(" = %.2f per hour: within the ~%.0f/h (1 per 10 min) very likely acceptable\n",
                    rate.per_hour, kAcceptableAlarmsPerHour);
      break;
    case AlarmRateRating::kManageable:
      out += Printf(
          " = %.2f per hour: above ~%.0f/h very likely acceptable, within ~%.0f/h "
          "maximum manageable\n",
          rate.per_hour, kAcceptableAlarmsPerHour, kManageableAlarmsPerHour);
      break;
    case AlarmRateRating::kOverload:
      out += Printf(" = %.2f per hour: OVER the ~%.0f/h maximum manageable for one operator\n",
                    rate.per_hour, kManageableAlarmsPerHour);
      break;
  }
  if (rate.rating != AlarmRateRating::kUnknown && rate.hours < 1.0) {
    out += "  (less than an hour recorded: the rate says little)\n";
  }
  out += Printf(
      "  (guidance per operator: ~%.0f/h very likely acceptable, ~%.0f/h maximum "
      "manageable; ISA-18.2, EEMUA 191)\n",
      kAcceptableAlarmsPerHour, kManageableAlarmsPerHour);
  if (rate.worst_window_raises > 0) {
    out += Printf("worst 10-minute window: %" PRId64 " raises from %s to %s",
                  rate.worst_window_raises, Timestamp(rate.worst_window_start).c_str(),
                  Timestamp(rate.worst_window_start + kFloodWindowUs).c_str());
    out +=
        rate.flood
            ? Printf(": ALARM FLOOD (more than %" PRId64 " in 10 minutes)\n", kFloodAlarms)
            : Printf(": no flood (a flood is more than %" PRId64 " in 10 minutes)\n", kFloodAlarms);
  } else {
    out += "worst 10-minute window: no raises\n";
  }
  out += Printf("10-minute periods with more than %" PRId64 " raises: %" PRId64 " of %" PRId64
                " (%s; guidance < %.0f %%)\n",
                kFloodAlarms, rate.flood_periods, rate.periods,
                Percent(rate.flood_periods, rate.periods).c_str(), kFloodPeriodsTargetPercent);

  if (report.scores) {
    const LabelScores& scores = *report.scores;
    const EventScores& all = scores.table.overall;
    out += Printf("\nlabels %s (%" PRId64 " windows, grace %.0f s): %" PRId64 " of %" PRId64
                  " anomaly windows detected by anomaly alarms\n",
                  scores.path.c_str(), scores.windows, scores.options.grace_s, all.detected,
                  all.windows);
    for (const WindowOutcome& outcome : all.outcomes) {
      out += Printf("  anomaly %s .. %s  ", Timestamp(outcome.start).c_str(),
                    Timestamp(outcome.end).c_str());
      out += outcome.detected ? Printf("detected after %s on %s", Delay(outcome.delay_s).c_str(),
                                       outcome.first_channel.c_str())
                              : std::string("missed");
      out += '\n';
    }
    out += Printf("  raises: %" PRId64 " true, %" PRId64 " during events (expected), %" PRId64
                  " false alarms (%s per day)\n",
                  all.true_raises, all.expected_raises, all.false_alarms,
                  Number(all.false_alarms_per_day, "%.2f").c_str());
    out += Printf(
        "  precision %s, recall %s, F1 %s, mean delay %s\n", Number(all.precision, "%.2f").c_str(),
        Number(all.recall, "%.2f").c_str(), Number(all.f1, "%.2f").c_str(),
        (std::isfinite(all.mean_delay_s) ? Delay(all.mean_delay_s) : std::string("-")).c_str());
    out += Printf("  %-*s  %8s  %8s  %6s  %9s  %6s\n", w, "channel", "true", "expected", "false",
                  "detected", "recall");
    for (const ChannelEventScores& channel : scores.table.channels) {
      const EventScores& c = channel.scores;
      out += Printf("  %-*s  %8" PRId64 "  %8" PRId64 "  %6" PRId64 "  %4" PRId64 "/%-4" PRId64
                    "  %6s\n",
                    w, channel.channel.c_str(), c.true_raises, c.expected_raises, c.false_alarms,
                    c.detected, c.windows, Number(c.recall, "%.2f").c_str());
    }
    const EventScores& sensor = scores.sensor_alarms;
    out += Printf("  sensor alarms (data quality, not scored as detection): %" PRId64
                  " raises, %" PRId64 " in anomaly windows, %" PRId64 " of %" PRId64
                  " windows had one\n",
                  sensor.raises, sensor.true_raises, sensor.detected, sensor.windows);
    if (!scores.detectors.empty()) {
      out +=
          Printf("\n  %-17s  %9s  %6s  %5s  %10s  %15s  %8s  %8s  %8s\n", "detector", "precision",
                 "recall", "F1", "mean delay", "false alarms/d", "point P", "point R", "point F1");
      for (const DetectorScores& detector_row : scores.detectors) {
        const EventScores& r = detector_row.table.overall;
        // printf pads by bytes; pad the UTF-8 name by code points instead.
        std::string name = detector_row.detector;
        std::size_t points = 0;
        for (const char ch : name) points += (static_cast<unsigned char>(ch) & 0xC0) != 0x80;
        if (points < 17) name.append(17 - points, ' ');
        const std::optional<PointScores>& p = detector_row.points;
        const auto point = [&p](double value) {
          return p ? Number(value, "%.2f") : std::string("-");
        };
        out += Printf(
            "  %s  %9s  %6s  %5s  %10s  %15s  %8s  %8s  %8s\n", name.c_str(),
            Number(r.precision, "%.2f").c_str(), Number(r.recall, "%.2f").c_str(),
            Number(r.f1, "%.2f").c_str(),
            (std::isfinite(r.mean_delay_s) ? Delay(r.mean_delay_s) : std::string("-")).c_str(),
            Number(r.false_alarms_per_day, "%.2f").c_str(), point(p ? p->precision() : 0.0).c_str(),
            point(p ? p->recall() : 0.0).c_str(), point(p ? p->f1() : 0.0).c_str());
      }
      if (report.baselines_wall_s > 0.0) {
        out += Printf("  (baselines replayed in %.2f s, %.2f s CPU)\n", report.baselines_wall_s,
                      report.baselines_cpu_s);
      }
    }
  }
  return out;
}

}  // namespace nightjar::replay
