// `nightjar replay`: runs recorded days through the engine, as fast as the CPU allows,
// and shows what would have been raised.
//
//   nightjar replay --input DAY.csv[.gz] [--input ...] --out DIR [--labels FILE ...]
//                   [--no-labels] [--skip-bad-rows] [--jobs N] [--seed N] [--config FILE]
//                   [--state-in DIR]
//
// Writes DIR/alerts.jsonl (one JSON object per raise or clear, time order),
// DIR/summary.json and DIR/report.html (a self-contained page of charts) per recording; with
// several recordings each goes to DIR/<name>/ and they run in parallel, one engine per recording on
// its own thread (--jobs, default the number of recordings, at most the number of hardware
// threads). Prints a summary per recording: alerts per channel and kind, the alarm rate against
// operator-load guidance, the worst 10-minute window and floods, and, with labels, which labelled
// windows got a raise and one score row each for nightjar, "next = last", static limits and a
// windowed gaussian (event-wise and point-wise; anomaly alarms only, sensor alarms apart). A
// labels file <name>.labels.csv beside a recording is used unless --labels names others (one per
// --input, in order) or --no-labels is given.
//
// With --state-in, channels whose checkpoint is in DIR (written by `nightjar learn` or
// the daemon) start from it, armed at once; a corrupt, truncated or mismatched file is
// named on stderr and its channel starts fresh, as do channels with no file. A folder
// that cannot be read fails the recording.
//
// A progress bar goes to stderr only when stderr is a terminal. Exit codes: 0 every
// recording replayed, 1 an input, config or output problem (the message names file, line
// and column where there is one), 2 usage errors.
#include <unistd.h>

#include <CLI/CLI.hpp>
#include <algorithm>
#include <atomic>
#include <chrono>
#include <cinttypes>
#include <cstdint>
#include <cstdio>
#include <filesystem>
#include <memory>
#include <mutex>
#include <string>
#include <system_error>
#include <thread>
#include <vector>

#include "command.h"
#include "commands.h"
#include "config/config.h"
#include "config_errors.h"
#include "replay/labels.h"
#include "replay/recording_reader.h"
#include "replay/replay_runner.h"
#include "replay/replay_summary.h"
#include "state_in.h"

namespace nightjar::daemon {
namespace {

struct ReplayFlags {
  std::vector<std::string> inputs;
  std::vector<std::string> labels;
  bool no_labels = false;
  std::string out_dir;
  bool skip_bad_rows = false;
  int jobs = 0;
  std::uint64_t seed = 0;
  std::string config;
  std::string state_in;
  CLI::Option* seed_option = nullptr;
};

int UsageError(const std::string& message) {
  std::fprintf(stderr, "nightjar replay: %s (see nightjar replay --help)\n", message.c_str());
  return 2;
}

// Lines of a file, for the progress bar; 0 if it cannot be read (the replay reports why).
std::int64_t CountLines(const std::string& path) {
  core::Result<std::unique_ptr<replay::LineReader>> lines = replay::LineReader::Open(path);
  if (!lines.ok()) return 0;
  std::string_view line;
  for (;;) {
    core::Result<bool> got = (*lines)->Next(&line);
    if (got.ok() && !*got) break;
    if (!got.ok() && (*lines)->failed()) break;
  }
  return (*lines)->line_number();
}

// One progress line on stderr, redrawn at most ten times a second from whichever worker
// reports; the others skip the redraw rather than wait.
class ProgressBar {
 public:
  explicit ProgressBar(const std::vector<std::string>& inputs)
      : done_lines_(inputs.size()), total_lines_(inputs.size(), 0) {
    for (std::size_t i = 0; i < inputs.size(); ++i) {
      total_lines_[i] = CountLines(inputs[i]);
      total_ += total_lines_[i];
    }
    for (auto& done : done_lines_) done.store(0);
  }

  void Update(std::size_t job, const replay::ReplayProgress& progress) {
    done_lines_[job].store(progress.line, std::memory_order_relaxed);
    const std::unique_lock<std::mutex> lock(mutex_, std::try_to_lock);
    if (!lock.owns_lock()) return;
    const auto now = std::chrono::steady_clock::now();
    if (drawn_ && now - last_draw_ < std::chrono::milliseconds(100)) return;
    drawn_ = true;
    last_draw_ = now;
    Draw();
  }

  // Removes the bar so the summary starts on a clean line.
  void Finish() {
    const std::lock_guard<std::mutex> lock(mutex_);
    if (drawn_) std::fputs("\r\033[K", stderr);
    std::fflush(stderr);
  }

 private:
  void Draw() {
    std::int64_t done = 0;
    std::size_t files_done = 0;
    for (std::size_t i = 0; i < done_lines_.size(); ++i) {
      const std::int64_t lines =
          std::min(done_lines_[i].load(std::memory_order_relaxed), total_lines_[i]);
      done += lines;
      if (total_lines_[i] > 0 && lines >= total_lines_[i]) ++files_done;
    }
    const double fraction =
        total_ > 0 ? static_cast<double>(done) / static_cast<double>(total_) : 0.0;
    constexpr int kWidth = 30;
    const int filled = std::clamp(static_cast<int>(fraction * kWidth), 0, kWidth);
    const std::string bar = std::string(static_cast<std::size_t>(filled), '#') +
                            std::string(static_cast<std::size_t>(kWidth - filled), '.');
    std::fprintf(stderr, "\r\033[Kreplay [%s] %3.0f %%  %zu/%zu recordings", bar.c_str(),
                 100.0 * fraction, files_done, done_lines_.size());
    std::fflush(stderr);
  }

  std::vector<std::atomic<std::int64_t>> done_lines_;
  std::vector<std::int64_t> total_lines_;
  std::int64_t total_ = 0;
  std::mutex mutex_;
  bool drawn_ = false;
  std::chrono::steady_clock::time_point last_draw_;
};

bool FileExists(const std::string& path) {
  std::error_code error;
  return std::filesystem::is_regular_file(path, error);
}

int RunReplayCommand(const ReplayFlags& flags) {
  if (flags.inputs.empty()) return UsageError("--input is required");
  if (flags.out_dir.empty()) return UsageError("--out is required");
  if (flags.jobs < 0) return UsageError("--jobs must be 1 or more (0: automatic)");
  if (!flags.labels.empty() && flags.labels.size() != flags.inputs.size()) {
    return UsageError("give one --labels per --input (" + std::to_string(flags.inputs.size()) +
                      " inputs, " + std::to_string(flags.labels.size()) + " labels)");
  }
  if (!flags.labels.empty() && flags.no_labels) {
    return UsageError("--labels and --no-labels exclude each other");
  }

  replay::ReplayOptions options;
  options.reader.skip_bad_rows = flags.skip_bad_rows;
  if (!flags.config.empty()) {
    const config::LoadResult loaded = config::LoadConfigFile(flags.config);
    if (!loaded.ok()) return PrintConfigErrors("replay", flags.config, loaded);
    options.engine = loaded.config->engine;
    options.resolver = loaded.config->Resolver();
  }
  if (flags.seed_option != nullptr && flags.seed_option->count() > 0) {
    options.engine.seed = flags.seed;
  }

  if (!flags.state_in.empty()) options.on_engine_ready = LoadStateHook("replay", flags.state_in);

  const std::vector<std::string> dirs = replay::OutputDirsFor(flags.inputs, flags.out_dir);
  std::vector<replay::ReplayJob> jobs;
  for (std::size_t i = 0; i < flags.inputs.size(); ++i) {
    replay::ReplayJob job{.input = flags.inputs[i], .labels = {}, .out_dir = dirs[i]};
    if (!flags.labels.empty()) {
      job.labels = flags.labels[i];
    } else if (!flags.no_labels) {
      const std::string beside = replay::LabelsPathFor(flags.inputs[i]);
      if (FileExists(beside)) job.labels = beside;
    }
    jobs.push_back(std::move(job));
  }

  const unsigned hardware = std::max(1u, std::thread::hardware_concurrency());
  const int threads =
      flags.jobs > 0 ? flags.jobs : static_cast<int>(std::min<std::size_t>(jobs.size(), hardware));

  std::unique_ptr<ProgressBar> bar;
  if (isatty(STDERR_FILENO) == 1) bar = std::make_unique<ProgressBar>(flags.inputs);
  std::function<void(std::size_t, const replay::ReplayProgress&)> on_progress;
  if (bar) {
    on_progress = [&bar](std::size_t job, const replay::ReplayProgress& progress) {
      bar->Update(job, progress);
    };
  }
  const std::vector<replay::ReplayReport> reports =
      replay::RunReplayJobs(jobs, options, threads, on_progress);
  if (bar) bar->Finish();

  int failed = 0;
  for (std::size_t i = 0; i < reports.size(); ++i) {
    const replay::ReplayReport& report = reports[i];
    if (i > 0) std::fputs("\n", stdout);
    std::fputs(replay::FormatReportText(report).c_str(), stdout);
    const replay::ReplaySummary& summary = report.summary;
    const std::int64_t lines = summary.alerts.raises() + summary.alerts.clears();
    std::printf("wrote %s/alerts.jsonl (%" PRId64 " lines), %s/summary.json and %s/report.html\n",
                jobs[i].out_dir.c_str(), lines, jobs[i].out_dir.c_str(), jobs[i].out_dir.c_str());
    if (!report.status.ok()) {
      ++failed;
      std::fflush(stdout);
      std::fprintf(stderr, "nightjar replay: %s\n", report.status.message().c_str());
    }
  }
  if (reports.size() > 1) {
    std::printf("\n%zu recordings on %d threads: %zu replayed, %d failed\n", reports.size(),
                std::min(threads, static_cast<int>(reports.size())),
                reports.size() - static_cast<std::size_t>(failed), failed);
  }
  std::fflush(stdout);
  return failed == 0 ? 0 : 1;
}

}  // namespace

Command AddReplayCommand(CLI::App& app) {
  auto flags = std::make_shared<ReplayFlags>();
  CLI::App* sub = app.add_subcommand(
      "replay", "Replay recorded days through the engine and report what would have been raised");
  sub->add_option("-i,--input", flags->inputs,
                  "Recording to replay (CSV, plain or .gz; format in replay_data/FORMAT.md); "
                  "repeat for several, run in parallel");
  sub->add_option(
      "-o,--out", flags->out_dir,
      "Output folder: alerts.jsonl, summary.json, report.html (per recording in <name>/ when "
      "there are several)");
  sub->add_option("--labels", flags->labels,
                  "Labels file for the --input in the same position (default: <name>.labels.csv "
                  "beside the recording, if present)");
  sub->add_flag("--no-labels", flags->no_labels, "Do not score against any labels file");
  sub->add_flag("--skip-bad-rows", flags->skip_bad_rows,
                "Count and skip malformed or out-of-order rows instead of stopping at the first");
  sub->add_option("-j,--jobs", flags->jobs,
                  "Recordings replayed at once (default: their number, at most the hardware "
                  "threads)");
  flags->seed_option =
      sub->add_option("--seed", flags->seed, "Engine seed (default: the config's, else 1)");
  sub->add_option("--config", flags->config, "YAML config file (see nightjar check-config)");
  sub->add_option("--state-in", flags->state_in,
                  "State folder (from nightjar learn): channels found there start armed");
  return Command{sub, [flags] { return RunReplayCommand(*flags); }};
}

}  // namespace nightjar::daemon
