// Replay: a recorded day through the detection engine, in the recording's own time.
//
// RunReplay reads a recording (recording_reader.h) row by row and feeds every non-empty
// cell to one core::Engine as a sample of the column's channel, as fast as the CPU
// allows; the engine's clock is moved on with the rows (Engine::AdvanceClock, at most
// once per second of recording time) so silent channels raise gap alarms just as they
// would live. Alerts are handed out in time order as they happen; a summary
// (replay_summary.h) counts what happened. Same recording, options and seed: the same
// alerts, bit for bit, whatever else runs at the same time.
//
// ReplayToDirectory adds the files `nightjar replay` writes: <dir>/alerts.jsonl (one
// core/alert_json.h object per line, raises and clears in time order),
// <dir>/summary.json (ReportToJson) and <dir>/report.html (report_html.h, fed by the
// bucketed sample trace, report_trace.h). With labels it also scores three baselines
// (baseline_scores.h: "next = last", static limits and windowed gaussian) in one extra
// cheap pass on the same thread, and every row point-wise (pointwise_scoring.h). RunReplayJobs runs
// several such jobs on a few threads, one Engine per recording.
//
// Thread-safety: RunReplay and ReplayToDirectory use only their arguments and may run on
// several threads at once; each call owns its reader and engine. Callbacks run on the
// calling thread (for RunReplayJobs: on the job's worker thread). A ChannelOptionsResolver
// shared by jobs is called from several threads at once and must be safe for that (a pure
// function of the channel name). Ownership: plain values; callbacks are borrowed for the
// duration of the call.
#pragma once

#include <cstddef>
#include <cstdint>
#include <functional>
#include <span>
#include <string>
#include <string_view>
#include <vector>

#include "core/alert.h"
#include "core/channel_pipeline.h"
#include "core/engine.h"
#include "core/engine_options.h"
#include "core/residual_tap.h"
#include "core/status.h"
#include "core/time.h"
#include "replay/recording_reader.h"
#include "replay/replay_summary.h"

namespace nightjar::replay {

struct ReplayOptions {
  ReaderOptions reader;                   // skip_bad_rows: count bad rows and go on
  core::EngineOptions engine;             // defaults and seed
  core::ChannelOptionsResolver resolver;  // per-channel options; empty: engine.defaults
  // Called once the recording's channels exist, before the first row (e.g. to load
  // checkpoints, state/state_directory.h), and once after the last row of a replay that
  // did not stop early (e.g. to save them). A non-OK status stops the replay (or fails
  // it at the end) and is returned. Shared by jobs: must be safe to call from several
  // threads at once, each call with its own engine.
  std::function<core::Status(core::Engine&)> on_engine_ready;
  std::function<core::Status(const core::Engine&)> on_engine_done;
  // Called once when the input has been read, before the summary is taken (learn uses
  // it to arm the channels on a known-good recording). Same threading as on_engine_ready.
  std::function<void(core::Engine&)> on_input_end;
  // Borrowed; when set, every channel reports its charted residuals to it (ChannelId =
  // column index). Not shared between RunReplayJobs workers: use with RunReplay only.
  core::ResidualTap* residual_tap = nullptr;
};

// One sample as the engine saw it, for reports that draw the forecast and its band.
struct TracePoint {
  core::TimestampUs time = 0;
  std::size_t channel = 0;        // column index (0 = first channel)
  std::string_view channel_name;  // valid during the callback
  double value = 0.0;             // the cell's value
  // The channel's state just after the sample (core::ChannelStatus): expected value and
  // residual sigma in engineering units (expected +- 3 sigma is the band), the largest
  // chart ratio (>= 1 signals) and the chart giving it.
  double expected = 0.0;
  double residual_sigma = 0.0;
  double ratio = 0.0;
  core::Detector detector = core::Detector::kCusum;
  core::ChannelState state = core::ChannelState::kLearning;
  bool used = false;  // false if the engine rejected it (not finite, out of range, repeated)
};

struct ReplayProgress {
  std::int64_t rows = 0;  // rows delivered so far
  std::int64_t line = 0;  // file line of the last row
};

// Rows between two progress callbacks.
inline constexpr std::int64_t kProgressEveryRows = 4096;

struct ReplayCallbacks {
  // Each row the reader delivers, with its time, before any of its cells is processed
  // (so the alerts a row causes come after its on_row; point-wise scoring relies on it).
  std::function<void(core::TimestampUs)> on_row;
  // Each alert, in time order. A non-OK status stops the replay and is returned.
  std::function<core::Status(const core::Alert&)> on_alert;
  // Each sample after the engine processed it. Costs a status copy per sample.
  std::function<void(const TracePoint&)> on_sample;
  // Every kProgressEveryRows rows and once at the end.
  std::function<void(const ReplayProgress&)> on_progress;
};

struct ReplayOutcome {
  // OK, or why the replay stopped early: the recording cannot be opened, a bad row
  // (unless skip_bad_rows; "<path>:<line>:<column>: ..."), a read error, a channel the
  // options reject, or a non-OK status from on_alert.
  core::Status status;
  ReplaySummary summary;  // covers what was replayed, also when it stopped early
};

ReplayOutcome RunReplay(const std::string& path, const ReplayOptions& options,
                        const ReplayCallbacks& callbacks = {});

struct ReplayJob {
  std::string input;    // the recording
  std::string labels;   // its labels file; empty: no labels, no scores
  std::string out_dir;  // created if missing; alerts.jsonl, summary.json, report.html replaced
};

// Reads the labels (if any; a bad labels file fails the job before the replay), runs
// the replay writing <out_dir>/alerts.jsonl, then (with labels, and only when the replay
// ran to its end) the baseline pass, and writes <out_dir>/summary.json and
// <out_dir>/report.html, also when the replay stopped early (then with "ok": false and
// the error). The report's
// status is the first failure: labels, replay, or writing the files.
ReplayReport ReplayToDirectory(const ReplayJob& job, const ReplayOptions& options,
                               const std::function<void(const ReplayProgress&)>& on_progress = {});

// Runs every job with ReplayToDirectory on min(threads, jobs.size()) worker threads
// (threads < 1 counts as 1); reports come back in job order. on_progress(job index,
// progress) is called from the worker threads, concurrently for different jobs.
std::vector<ReplayReport> RunReplayJobs(
    std::span<const ReplayJob> jobs, const ReplayOptions& options, int threads,
    const std::function<void(std::size_t, const ReplayProgress&)>& on_progress = {});

// The name of a recording without its folder and without ".csv.gz", ".csv" or ".gz":
// "data/cw2_day.csv.gz" -> "cw2_day". Never empty, "." or ".." ("recording" instead).
std::string RecordingStem(std::string_view path);

// Output folders for several recordings under `out_dir`: one recording writes into
// out_dir itself; several each into out_dir/<stem>, with "-2", "-3", ... appended in
// input order to a name already taken.
std::vector<std::string> OutputDirsFor(std::span<const std::string> inputs,
                                       const std::string& out_dir);

}  // namespace nightjar::replay
