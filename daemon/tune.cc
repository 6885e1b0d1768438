// `nightjar tune`: one replay of a recorded day to cache each channel's residuals, then a
// sweep of threshold settings re-run on the cache, and a config that applies the winners.
//
//   nightjar tune --input DAY.csv[.gz] --out tuned.yaml [--labels FILE | --no-labels]
//                 [--config FILE] [--max-alarms-per-day N] [--jobs N] [--seed N]
//                 [--skip-bad-rows] [--state-in DIR]
//
// With labels (--labels, or <name>.labels.csv beside the recording) each channel gets the
// setting that maximises the overall event F1; without, the most sensitive setting whose
// anomaly raise rate stays within its share of --max-alarms-per-day. The rules, the grid
// and the approximation are in lib/replay/threshold_sweep.h and replay_data/FORMAT.md
// ("Tuning"). tuned.yaml is the --config file (if any) plus one block per channel; it is
// checked by loading it before it is written. With --state-in, channels whose checkpoint
// is in DIR (from `nightjar learn`) start from it, as in `nightjar replay --state-in`, so
// the residuals tuned on are those of a learnt model (threshold_sweep.h says how a
// channel armed from the start is re-run). The tuned thresholds are part of a
// checkpoint's options fingerprint: learn again with the tuned config before using it
// with a state folder.
// Exit codes: 0 written, 1 input, config or output problem (the message names file, line
// and key where there is one), 2 usage errors.
#include <CLI/CLI.hpp>
#include <algorithm>
#include <cinttypes>
#include <cstdint>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <iterator>
#include <memory>
#include <string>
#include <system_error>
#include <thread>

#include "command.h"
#include "commands.h"
#include "config/config.h"
#include "config_errors.h"
#include "replay/labels.h"
#include "replay/residual_cache.h"
#include "replay/threshold_sweep.h"
#include "replay/tuned_config_writer.h"
#include "state_in.h"

namespace nightjar::daemon {
namespace {

struct TuneFlags {
  std::string input;
  std::string labels;
  bool no_labels = false;
  std::string config;
  std::string out;
  double max_alarms_per_day = replay::kDefaultMaxAlarmsPerDay;
  int jobs = 0;
  std::uint64_t seed = 0;
  bool skip_bad_rows = false;
  std::string state_in;
  CLI::Option* seed_option = nullptr;
};

int UsageError(const std::string& message) {
  std::fprintf(stderr, "nightjar tune: %s (see nightjar tune --help)\n", message.c_str());
  return 2;
}

int Failure(const std::string& message) {
  std::fprintf(stderr, "nightjar tune: %s\n", message.c_str());
  return 1;
}

bool ReadWhole(const std::string& path, std::string* text) {
  std::ifstream in(path, std::ios::binary);
  if (!in) return false;
  text->assign(std::istreambuf_iterator<char>(in), std::istreambuf_iterator<char>());
  return !in.bad();
}

int RunTuneCommand(const TuneFlags& flags) {
  if (flags.input.empty()) return UsageError("--input is required");
  if (flags.out.empty()) return UsageError("--out is required");
  if (flags.jobs < 0) return UsageError("--jobs must be 1 or more (0: automatic)");
  if (!flags.labels.empty() && flags.no_labels) {
    return UsageError("--labels and --no-labels exclude each other");
  }
  if (!(flags.max_alarms_per_day > 0.0)) return UsageError("--max-alarms-per-day must be > 0");

  replay::ReplayOptions options;
  options.reader.skip_bad_rows = flags.skip_bad_rows;
  replay::TunedConfigSource source;
  source.input = flags.input;
  if (!flags.config.empty()) {
    const config::LoadResult loaded = config::LoadConfigFile(flags.config);
    if (!loaded.ok()) return PrintConfigErrors("tune", flags.config, loaded);
    options.engine = loaded.config->engine;
    options.resolver = loaded.config->Resolver();
    source.config_path = flags.config;
    if (!ReadWhole(flags.config, &source.config_text)) {
      return Failure(flags.config + ": cannot be read");
    }
  }
  if (flags.seed_option != nullptr && flags.seed_option->count() > 0) {
    options.engine.seed = flags.seed;
  }

  if (!flags.state_in.empty()) options.on_engine_ready = LoadStateHook("tune", flags.state_in);

  replay::SweepOptions sweep;
  sweep.max_alarms_per_day = flags.max_alarms_per_day;
  const unsigned hardware = std::max(1u, std::thread::hardware_concurrency());
  sweep.jobs = flags.jobs > 0 ? flags.jobs : static_cast<int>(hardware);
  std::string labels_path = flags.labels;
  if (labels_path.empty() && !flags.no_labels) {
    const std::string beside = replay::LabelsPathFor(flags.input);
    std::error_code error;
    if (std::filesystem::is_regular_file(beside, error)) labels_path = beside;
  }
  if (!labels_path.empty()) {
    core::Result<std::vector<replay::LabelWindow>> windows = replay::ReadLabels(labels_path);
    if (!windows.ok()) return Failure(windows.status().message());
    sweep.labels = std::move(*windows);
    source.labels = labels_path;
  }

  core::Result<replay::ResidualCache> cache = replay::BuildResidualCache(flags.input, options);
  if (!cache.ok()) return Failure(cache.status().message());
  core::Result<replay::SweepResult> result = replay::RunSweep(*cache, sweep);
  if (!result.ok()) return Failure(result.status().message());
  core::Result<std::string> text = replay::WriteTunedConfig(source, *result);
  if (!text.ok()) return Failure(text.status().message());

  // What we write must load: a tuned file that check-config rejects is a bug, not output.
  const config::LoadResult check = config::LoadConfigString(*text, flags.out);
  if (!check.ok()) return PrintConfigErrors("tune", "the tuned config (not written)", check);
  {
    std::ofstream out(flags.out, std::ios::binary | std::ios::trunc);
    out << *text;
    out.close();
    if (!out) return Failure(flags.out + ": cannot be written");
  }

  std::printf("tuned %zu channels of %s: %zu settings each, %" PRId64
              " re-runs on cached residuals\n",
              result->channels.size(), flags.input.c_str(), result->settings, result->evaluations);
  if (result->labelled) {
    std::printf("overall event F1 %.3f (configured settings %.3f) against %s\n",
                result->chosen_overall_f1, result->base_overall_f1, labels_path.c_str());
  } else {
    std::printf("budget %.1f anomaly raises per channel per day (%g per day shared by %zu)\n",
                result->per_channel_budget, flags.max_alarms_per_day, result->channels.size());
  }
  for (const replay::ChannelChoice& choice : result->channels) {
    std::printf("  %s: %s\n    %s\n", choice.channel.c_str(),
                replay::DescribeSetting(choice.chosen).c_str(), choice.reason.c_str());
  }
  std::printf("wrote %s\n", flags.out.c_str());
  std::fflush(stdout);
  return 0;
}

}  // namespace

Command AddTuneCommand(CLI::App& app) {
  auto flags = std::make_shared<TuneFlags>();
  CLI::App* sub = app.add_subcommand(
      "tune", "Sweep threshold settings on one replay's residuals and write a tuned config");
  sub->add_option("-i,--input", flags->input,
                  "Recording to tune on (CSV, plain or .gz; format in replay_data/FORMAT.md)");
  sub->add_option("-o,--out", flags->out, "Tuned config to write (YAML)");
  sub->add_option("--labels", flags->labels,
                  "Labels file: choose for event F1 (default: <name>.labels.csv beside the "
                  "recording, if present)");
  sub->add_flag("--no-labels", flags->no_labels,
                "Ignore any labels file: choose for alarm rate only");
  sub->add_option("--config", flags->config,
                  "YAML config file to start from; copied into the output (see nightjar "
                  "check-config)");
  sub->add_option("--max-alarms-per-day", flags->max_alarms_per_day,
                  "Without labels: anomaly raises per day allowed for the whole recording, "
                  "shared equally by its channels (default 150, operator-load guidance)");
  sub->add_option("-j,--jobs", flags->jobs,
                  "Threads for the sweep (default: the hardware threads)");
  flags->seed_option =
      sub->add_option("--seed", flags->seed, "Engine seed (default: the config's, else 1)");
  sub->add_flag("--skip-bad-rows", flags->skip_bad_rows,
                "Count and skip malformed or out-of-order rows instead of stopping at the first");
  sub->add_option("--state-in", flags->state_in,
                  "State folder (from nightjar learn): channels found there start armed");
  return Command{sub, [flags] { return RunTuneCommand(*flags); }};
}

}  // namespace nightjar::daemon
