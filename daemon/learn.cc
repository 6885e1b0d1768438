// `nightjar learn`: trains every channel on a known-good recording and writes its state,
// so the channels start armed next time (`nightjar replay --state-in`, later `run`).
//
//   nightjar learn --input GOOD.csv[.gz] --state-out DIR [--config FILE] [--seed N]
//                  [--skip-bad-rows] [--alerts FILE] [--state-in DIR]
//
// Replays the recording through the engine (lib/replay RunReplay) and writes one
// checkpoint per channel into DIR (lib/state, format in lib/state/FORMAT.md). Alerts
// raised while learning are counted and summarised, and written as JSON lines only to
// --alerts FILE. Prints per channel whether it ended armed or still learning. With
// --state-in, channels whose checkpoint is in DIR go on learning from it (several
// known-good recordings learnt one after the other), as `nightjar replay --state-in`
// loads it.
//
// Exit codes: 0 the state was written, also when some channels are still learning (the
// recording was too short for them: a warning per channel says so, and they go on
// learning from their state); 1 the recording, config or state folder failed (the message
// names file, line and column where there is one); 2 usage errors.
#include <CLI/CLI.hpp>
#include <cinttypes>
#include <cstdint>
#include <cstdio>
#include <fstream>
#include <memory>
#include <string>

#include "command.h"
#include "commands.h"
#include "config/config.h"
#include "config_errors.h"
#include "core/alert_json.h"
#include "core/channel_pipeline.h"
#include "replay/replay_runner.h"
#include "state/state_directory.h"
#include "state_in.h"

namespace nightjar::daemon {
namespace {

struct LearnFlags {
  std::string input;
  std::string state_out;
  std::string config;
  std::string alerts;
  std::string state_in;
  bool skip_bad_rows = false;
  std::uint64_t seed = 0;
  CLI::Option* seed_option = nullptr;
};

int UsageError(const std::string& message) {
  std::fprintf(stderr, "nightjar learn: %s (see nightjar learn --help)\n", message.c_str());
  return 2;
}

int RunLearnCommand(const LearnFlags& flags) {
  if (flags.input.empty()) return UsageError("--input is required");
  if (flags.state_out.empty()) return UsageError("--state-out is required");

  replay::ReplayOptions options;
  options.reader.skip_bad_rows = flags.skip_bad_rows;
  if (!flags.config.empty()) {
    const config::LoadResult loaded = config::LoadConfigFile(flags.config);
    if (!loaded.ok()) return PrintConfigErrors("learn", flags.config, loaded);
    options.engine = loaded.config->engine;
    options.resolver = loaded.config->Resolver();
  }
  if (flags.seed_option != nullptr && flags.seed_option->count() > 0) {
    options.engine.seed = flags.seed;
  }
  if (!flags.state_in.empty()) options.on_engine_ready = LoadStateHook("learn", flags.state_in);
  const std::string state_out = flags.state_out;
  // The recording is known to be good: arm what has learnt enough, forget its alarms.
  options.on_input_end = [](core::Engine& engine) { engine.ConcludeKnownGood(); };
  options.on_engine_done = [&state_out](const core::Engine& engine) {
    return state::SaveEngineState(engine, state_out);
  };

  std::unique_ptr<std::ofstream> alerts_file;
  if (!flags.alerts.empty()) {
    alerts_file = std::make_unique<std::ofstream>(flags.alerts, std::ios::trunc);
    if (!*alerts_file) {
      std::fprintf(stderr, "nightjar learn: %s: cannot write\n", flags.alerts.c_str());
      return 1;
    }
  }
  replay::ReplayCallbacks callbacks;
  std::string line;
  if (alerts_file) {
    callbacks.on_alert = [&](const core::Alert& alert) {
      line.clear();
      core::AppendAlertJson(alert, &line);
      line.push_back('\n');
      alerts_file->write(line.data(), static_cast<std::streamsize>(line.size()));
      if (!*alerts_file) return core::Status::Unavailable(flags.alerts + ": write failed");
      return core::Status::Ok();
    };
  }

  const replay::ReplayOutcome outcome = replay::RunReplay(flags.input, options, callbacks);
  if (alerts_file) alerts_file->close();
  if (!outcome.status.ok()) {
    std::fprintf(stderr, "nightjar learn: %s\n", outcome.status.message().c_str());
    return 1;
  }
  const replay::ReplaySummary& summary = outcome.summary;
  std::printf("learnt from %s: %" PRId64 " rows, %" PRId64 " samples\n", flags.input.c_str(),
              summary.rows, summary.samples);
  for (const replay::ChannelSummary& channel : summary.channels) {
    std::printf("  %-40s %-9s %8" PRId64 " samples, %" PRId64 " raises\n", channel.name.c_str(),
                core::ChannelStateName(channel.final_state), channel.samples,
                channel.alerts.raises());
  }
  std::printf("alerts raised during the learning run: %" PRId64 " (%s)\n", summary.alerts.raises(),
              alerts_file ? flags.alerts.c_str() : "not written; --alerts FILE writes them");
  std::printf("wrote the state of %zu channel%s to %s\n", summary.channels.size(),
              summary.channels.size() == 1 ? "" : "s", state_out.c_str());
  std::fflush(stdout);
  for (const replay::ChannelSummary& channel : summary.channels) {
    if (channel.final_state != core::ChannelState::kLearning) continue;
    std::fprintf(stderr,
                 "nightjar learn: warning: %s is still learning: the recording is too short "
                 "for its residual scale to settle; it goes on learning from the saved state\n",
                 channel.name.c_str());
  }
  return 0;
}

}  // namespace

Command AddLearnCommand(CLI::App& app) {
  auto flags = std::make_shared<LearnFlags>();
  CLI::App* sub = app.add_subcommand(
      "learn", "Train every channel on a known-good recording and save its state (armed)");
  sub->add_option("-i,--input", flags->input,
                  "Known-good recording (CSV, plain or .gz; format in replay_data/FORMAT.md)");
  sub->add_option("--state-out", flags->state_out,
                  "State folder to write, one file per channel (lib/state/FORMAT.md)");
  sub->add_option("--config", flags->config, "YAML config file (see nightjar check-config)");
  flags->seed_option =
      sub->add_option("--seed", flags->seed, "Engine seed (default: the config's, else 1)");
  sub->add_flag("--skip-bad-rows", flags->skip_bad_rows,
                "Count and skip malformed or out-of-order rows instead of stopping at the first");
  sub->add_option("--alerts", flags->alerts,
                  "Also write the alerts raised while learning to this file (JSON lines)");
  sub->add_option("--state-in", flags->state_in,
                  "State folder to go on learning from (from an earlier nightjar learn)");
  return Command{sub, [flags] { return RunLearnCommand(*flags); }};
}

}  // namespace nightjar::daemon
