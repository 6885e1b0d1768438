#include "replay/replay_runner.h"

#include <algorithm>
#include <atomic>
#include <cerrno>
#include <chrono>
#include <cstdio>
#include <ctime>
#include <filesystem>
#include <memory>
#include <optional>
#include <set>
#include <system_error>
#include <thread>
#include <unordered_map>
#include <utility>

#include "core/alert_json.h"
#include "replay/baseline_scores.h"
#include "replay/labels.h"
#include "replay/pointwise_scoring.h"
#include "replay/report_html.h"
#include "replay/report_trace.h"

namespace nightjar::replay {
namespace {

// The engine's clock moves on at most once per second of recording time, as it does
// by itself in Engine::Process; rows with no sample at all still move it.
constexpr core::TimestampUs kClockStep = core::kMicrosPerSecond;
// alerts.jsonl is written in chunks of about this size.
constexpr std::size_t kWriteChunkBytes = std::size_t{1} << 16;

std::string ErrnoText() { return std::generic_category().message(errno); }

// A file written in chunks; every failure is reported with the path, never thrown.
class OutputFile {
 public:
  OutputFile() = default;
  ~OutputFile() {
    if (file_ != nullptr) std::fclose(file_);
  }
  OutputFile(const OutputFile&) = delete;
  OutputFile& operator=(const OutputFile&) = delete;

  core::Status Open(const std::string& path) {
    path_ = path;
    file_ = std::fopen(path.c_str(), "wb");
    if (file_ == nullptr) {
      return core::Status::Unavailable("cannot create '" + path + "': " + ErrnoText());
    }
    return core::Status::Ok();
  }
  // Appends to the buffer; writes it out once it holds a chunk.
  core::Status Append(std::string_view text) {
    buffer_.append(text);
    return buffer_.size() >= kWriteChunkBytes ? Flush() : core::Status::Ok();
  }
  std::string& buffer() { return buffer_; }
  core::Status Flush() {
    if (buffer_.empty()) return core::Status::Ok();
    const std::size_t written = std::fwrite(buffer_.data(), 1, buffer_.size(), file_);
    if (written != buffer_.size()) {
      return core::Status::Unavailable("cannot write '" + path_ + "': " + ErrnoText());
    }
    buffer_.clear();
    return core::Status::Ok();
  }
  core::Status Close() {
    core::Status flushed = Flush();
    const int closed = std::fclose(file_);
    file_ = nullptr;
    if (!flushed.ok()) return flushed;
    if (closed != 0) {
      return core::Status::Unavailable("cannot write '" + path_ + "': " + ErrnoText());
    }
    return core::Status::Ok();
  }

 private:
  std::string path_;
  std::FILE* file_ = nullptr;
  std::string buffer_;
};

core::Status WriteWholeFile(const std::string& path, std::string_view text) {
  OutputFile file;
  if (core::Status opened = file.Open(path); !opened.ok()) return opened;
  file.buffer().assign(text);
  return file.Close();
}

double SecondsSince(std::chrono::steady_clock::time_point start) {
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
}

// CPU time used by the calling thread so far (POSIX), in seconds; 0 if unavailable.
double ThreadCpuSeconds() {
  timespec now{};
  if (clock_gettime(CLOCK_THREAD_CPUTIME_ID, &now) != 0) return 0.0;
  return static_cast<double>(now.tv_sec) + static_cast<double>(now.tv_nsec) * 1e-9;
}

}  // namespace

ReplayOutcome RunReplay(const std::string& path, const ReplayOptions& options,
                        const ReplayCallbacks& callbacks) {
  const auto wall_start = std::chrono::steady_clock::now();
  const double cpu_start = ThreadCpuSeconds();
  ReplayOutcome outcome;
  ReplaySummary& summary = outcome.summary;
  summary.input = path;
  summary.seed = options.engine.seed;

  core::Result<std::unique_ptr<RecordingReader>> opened =
      RecordingReader::Open(path, options.reader);
  if (!opened.ok()) {
    outcome.status = opened.status();
    return outcome;
  }
  RecordingReader& reader = **opened;

  core::Engine engine(options.engine, options.resolver);
  engine.set_residual_tap(options.residual_tap);
  const std::vector<std::string>& names = reader.channels();
  std::vector<core::ChannelId> ids;
  ids.reserve(names.size());
  summary.channels.resize(names.size());
  for (std::size_t i = 0; i < names.size(); ++i) {
    summary.channels[i].name = names[i];
    core::Result<core::ChannelId> added = engine.AddChannel(names[i]);
    if (!added.ok()) {
      outcome.status = core::Status::InvalidArgument(path + ":1:" + std::to_string(i + 2) + ": " +
                                                     added.status().message());
      return outcome;
    }
    ids.push_back(*added);
  }
  if (options.on_engine_ready) {
    if (core::Status ready = options.on_engine_ready(engine); !ready.ok()) {
      outcome.status = std::move(ready);
      return outcome;
    }
  }
  // Alert channel name -> column, for the per-channel counts.
  std::unordered_map<std::string_view, std::uint32_t> column_of;
  for (std::size_t i = 0; i < names.size(); ++i) {
    column_of.emplace(names[i], static_cast<std::uint32_t>(i));
  }

  std::vector<core::Alert> alerts;
  alerts.reserve(16);
  // Per channel: rejected + out-of-order counts before the sample, to tell if it was used.
  std::vector<std::int64_t> dropped_before(names.size(), 0);
  bool clock_started = false;
  core::TimestampUs clock = 0;
  RecordingRow row;
  std::int64_t last_line = 0;

  const auto deliver = [&]() -> core::Status {
    if (alerts.empty()) return core::Status::Ok();
    if (!std::is_sorted(
            alerts.begin(), alerts.end(),
            [](const core::Alert& a, const core::Alert& b) { return a.time < b.time; })) {
      std::stable_sort(alerts.begin(), alerts.end(),
                       [](const core::Alert& a, const core::Alert& b) { return a.time < b.time; });
    }
    core::Status status;
    for (const core::Alert& alert : alerts) {
      summary.alerts.Add(alert);
      const auto found = column_of.find(alert.channel);
      const std::uint32_t column = found == column_of.end() ? 0 : found->second;
      if (found != column_of.end()) summary.channels[column].alerts.Add(alert);
      if (alert.phase == core::AlertPhase::kRaise) {
        summary.raises.push_back(
            RaiseRecord{alert.time, column, alert.kind, alert.detector, alert.annunciated});
      }
      if (callbacks.on_alert && status.ok()) status = callbacks.on_alert(alert);
    }
    alerts.clear();
    return status;
  };

  for (;;) {
    core::Result<bool> got = reader.Next(&row);
    if (!got.ok()) {
      outcome.status = got.status();
      break;
    }
    if (!*got) break;
    last_line = row.line;
    if (callbacks.on_row) callbacks.on_row(row.time);
    if (!summary.first_time) summary.first_time = row.time;
    summary.last_time = row.time;
    if (!clock_started || row.time >= clock + kClockStep) {
      engine.AdvanceClock(row.time, alerts);
      clock_started = true;
      clock = row.time;
    }
    for (std::size_t i = 0; i < row.values.size(); ++i) {
      const std::optional<double>& cell = row.values[i];
      if (!cell) {
        ++summary.empty_cells;
        continue;
      }
      engine.Process(ids[i], row.time, *cell, alerts);
      ++summary.samples;
      ++summary.channels[i].samples;
      if (callbacks.on_sample) {
        const core::ChannelStatus status = engine.channel_status(ids[i]);
        const std::int64_t dropped = status.rejected + status.out_of_order;
        callbacks.on_sample(TracePoint{
            .time = row.time,
            .channel = i,
            .channel_name = names[i],
            .value = *cell,
            .expected = status.last_expected,
            .residual_sigma = status.last_residual_sigma,
            .ratio = status.last_ratio,
            .detector = status.last_detector,
            .state = status.state,
            .used = dropped == dropped_before[i],
        });
        dropped_before[i] = dropped;
      }
    }
    if (core::Status delivered = deliver(); !delivered.ok()) {
      outcome.status = std::move(delivered);
      break;
    }
    if (callbacks.on_progress && reader.rows_read() % kProgressEveryRows == 0) {
      callbacks.on_progress(ReplayProgress{reader.rows_read(), last_line});
    }
  }

  if (outcome.status.ok() && options.on_input_end) options.on_input_end(engine);
  summary.rows = reader.rows_read();
  summary.skipped_rows = reader.skipped_rows();
  summary.out_of_order_rows = reader.out_of_order_rows();
  summary.repeated_timestamps = reader.repeated_timestamps();
  summary.first_skip_reason = reader.first_skip_reason();
  for (std::size_t i = 0; i < ids.size(); ++i) {
    const core::ChannelStatus status = engine.channel_status(ids[i]);
    ChannelSummary& channel = summary.channels[i];
    channel.rejected = status.rejected;
    channel.out_of_order = status.out_of_order;
    channel.relearns = status.relearns;
    channel.context = engine.channel(ids[i]).context_names();
    channel.sample_period_s = status.sample_period_s;
    channel.final_state = status.state;
    summary.rejected_samples += status.rejected;
    summary.out_of_order_samples += status.out_of_order;
  }
  summary.rejected_samples += engine.rejected_samples();
  if (outcome.status.ok() && options.on_engine_done)
    outcome.status = options.on_engine_done(engine);
  if (callbacks.on_progress) callbacks.on_progress(ReplayProgress{summary.rows, last_line});
  summary.wall_s = SecondsSince(wall_start);
  summary.cpu_s = ThreadCpuSeconds() - cpu_start;
  return outcome;
}

ReplayReport ReplayToDirectory(const ReplayJob& job, const ReplayOptions& options,
                               const std::function<void(const ReplayProgress&)>& on_progress) {
  ReplayReport report;
  report.summary.input = job.input;
  report.summary.seed = options.engine.seed;

  std::optional<std::vector<LabelWindow>> labels;
  if (!job.labels.empty()) {
    core::Result<std::vector<LabelWindow>> read = ReadLabels(job.labels);
    if (!read.ok()) {
      report.status = read.status();
      return report;
    }
    labels = std::move(read).value();
  }

  std::error_code error;
  const std::filesystem::path dir(job.out_dir);
  std::filesystem::create_directories(dir, error);
  if (error || !std::filesystem::is_directory(dir, error)) {
    report.status = core::Status::Unavailable("cannot create the output folder '" + job.out_dir +
                                              "': " + (error ? error.message() : "not a folder"));
    return report;
  }
  const std::string alerts_path = (dir / "alerts.jsonl").string();
  const std::string summary_path = (dir / "summary.json").string();
  const std::string report_path = (dir / "report.html").string();
  // A summary or page left from an earlier run must not pass for this one's.
  std::filesystem::remove(summary_path, error);
  std::filesystem::remove(report_path, error);

  OutputFile alerts_file;
  if (core::Status opened = alerts_file.Open(alerts_path); !opened.ok()) {
    report.status = opened;
    return report;
  }
  // The page's traces, bucketed as they come (bounded memory), and nightjar's alerts.
  ReportTrace trace;
  std::vector<core::Alert> page_alerts;
  // nightjar's point-wise counts: its anomaly alarms only (FORMAT.md "Scoring").
  SeriesPointScorer points(labels ? std::span<const LabelWindow>(*labels)
                                  : std::span<const LabelWindow>());
  ReplayCallbacks callbacks;
  callbacks.on_sample = [&trace](const TracePoint& point) { trace.Add(point); };
  callbacks.on_row = [&points](core::TimestampUs time) { points.Row(time); };
  callbacks.on_alert = [&alerts_file, &page_alerts, &points](const core::Alert& alert) {
    if (alert.kind == core::AlertKind::kAnomaly) points.Edge(alert.channel, alert.phase);
    page_alerts.push_back(alert);
    std::string& buffer = alerts_file.buffer();
    core::AppendAlertJson(alert, &buffer);
    buffer.push_back('\n');
    return buffer.size() >= kWriteChunkBytes ? alerts_file.Flush() : core::Status::Ok();
  };
  callbacks.on_progress = on_progress;
  ReplayOutcome outcome = RunReplay(job.input, options, callbacks);
  report.status = std::move(outcome.status);
  report.summary = std::move(outcome.summary);
  if (core::Status closed = alerts_file.Close(); !closed.ok() && report.status.ok()) {
    report.status = closed;
  }

  report.alarm_rate = ComputeAlarmRate(report.summary);
  std::vector<std::string> names;
  names.reserve(report.summary.channels.size());
  for (const ChannelSummary& channel : report.summary.channels) names.push_back(channel.name);
  if (labels) {
    report.scores = ScoreAgainstLabels(report.summary, *labels, job.labels);
    points.Finish();
    report.scores->detectors.front().points = points.scores();
    // Only a full nightjar pass is worth setting baselines against.
    if (report.status.ok()) {
      const auto wall_start = std::chrono::steady_clock::now();
      const double cpu_start = ThreadCpuSeconds();
      BaselineOutcome baselines = ScoreBaselines(job.input, options, *labels, names,
                                                 report.scores->duration_s, report.scores->options);
      report.baselines_wall_s = SecondsSince(wall_start);
      report.baselines_cpu_s = ThreadCpuSeconds() - cpu_start;
      if (!baselines.status.ok()) report.status = std::move(baselines.status);
      for (DetectorScores& row : baselines.rows) {
        report.scores->detectors.push_back(std::move(row));
      }
    }
  }

  ReportInput page;
  page.file_name = std::filesystem::path(job.input).filename().string();
  page.channels = trace.Channels(names);
  page.alerts = std::move(page_alerts);
  if (labels) page.windows = *labels;
  if (report.scores) {
    page.scoring = report.scores->options;
    for (const DetectorScores& row : report.scores->detectors) {
      page.scores.push_back(ReportScoreRow{row.detector, row.table, row.points});
    }
  }
  if (core::Status written = WriteWholeFile(report_path, RenderReport(page));
      !written.ok() && report.status.ok()) {
    report.status = written;
  }
  if (core::Status written = WriteWholeFile(summary_path, ReportToJson(report));
      !written.ok() && report.status.ok()) {
    report.status = written;
  }
  return report;
}

std::vector<ReplayReport> RunReplayJobs(
    std::span<const ReplayJob> jobs, const ReplayOptions& options, int threads,
    const std::function<void(std::size_t, const ReplayProgress&)>& on_progress) {
  std::vector<ReplayReport> reports(jobs.size());
  std::atomic<std::size_t> next{0};
  const auto work = [&]() {
    for (;;) {
      const std::size_t i = next.fetch_add(1);
      if (i >= jobs.size()) return;
      std::function<void(const ReplayProgress&)> progress;
      if (on_progress) {
        progress = [&on_progress, i](const ReplayProgress& p) { on_progress(i, p); };
      }
      reports[i] = ReplayToDirectory(jobs[i], options, progress);
    }
  };
  const std::size_t wanted = std::min(jobs.size(), static_cast<std::size_t>(std::max(threads, 1)));
  std::vector<std::thread> workers;
  workers.reserve(wanted);
  for (std::size_t t = 0; t < wanted; ++t) {
    try {
      workers.emplace_back(work);
    } catch (const std::system_error&) {
      break;  // no more threads to be had: the ones running (or this one) do the rest
    }
  }
  if (workers.empty()) work();
  for (std::thread& worker : workers) worker.join();
  return reports;
}

std::string RecordingStem(std::string_view path) {
  const std::size_t slash = path.find_last_of('/');
  std::string_view name = slash == std::string_view::npos ? path : path.substr(slash + 1);
  for (const std::string_view suffix : {".gz", ".csv"}) {
    if (name.size() > suffix.size() && name.ends_with(suffix)) {
      name.remove_suffix(suffix.size());
    }
  }
  // Never a name that means this folder or its parent.
  if (name.empty() || name == "." || name == "..") return "recording";
  return std::string(name);
}

std::vector<std::string> OutputDirsFor(std::span<const std::string> inputs,
                                       const std::string& out_dir) {
  std::vector<std::string> dirs;
  if (inputs.size() == 1) {
    dirs.push_back(out_dir);
    return dirs;
  }
  std::set<std::string> taken;
  for (const std::string& input : inputs) {
    const std::string stem = RecordingStem(input);
    std::string name = stem;
    for (int n = 2; taken.count(name) > 0; ++n) name = stem + "-" + std::to_string(n);
    taken.insert(name);
    dirs.push_back((std::filesystem::path(out_dir) / name).string());
  }
  return dirs;
}

}  // namespace nightjar::replay
