// `nightjar check-config FILE`: loads a config file the way replay, tune and the daemon do
// and reports every problem in it at once, as FILE:LINE:COL: KEY: MESSAGE lines on stderr.
// Exit 0 when the file is clean (a one-line summary on stdout), 1 when it has errors, 2 on
// usage errors. `--print-defaults` prints every key with its default (a valid config file).
#include <CLI/CLI.hpp>
#include <cstdio>
#include <memory>
#include <string>

#include "command.h"
#include "commands.h"
#include "config/config.h"

namespace nightjar::daemon {
namespace {

struct CheckConfigFlags {
  std::string file;
  bool print_defaults = false;
};

int RunCheckConfig(const CheckConfigFlags& flags) {
  if (flags.print_defaults) {
    std::fputs(config::RenderReferenceYaml().c_str(), stdout);
    if (flags.file.empty()) return 0;
  }
  if (flags.file.empty()) {
    std::fputs("check-config: FILE is required (or --print-defaults)\n", stderr);
    return 2;
  }
  const config::LoadResult result = config::LoadConfigFile(flags.file);
  for (const config::ConfigError& error : result.errors) {
    std::fprintf(stderr, "%s\n", error.ToString().c_str());
  }
  if (!result.ok()) {
    std::fprintf(stderr, "%s: %zu error%s\n", flags.file.c_str(), result.errors.size(),
                 result.errors.size() == 1 ? "" : "s");
    return 1;
  }
  const std::size_t blocks = result.config->overrides.size();
  std::printf("%s: OK, %zu override block%s, seed %llu\n", flags.file.c_str(), blocks,
              blocks == 1 ? "" : "s", static_cast<unsigned long long>(result.config->engine.seed));
  return 0;
}

}  // namespace

Command AddCheckConfigCommand(CLI::App& app) {
  auto flags = std::make_shared<CheckConfigFlags>();
  CLI::App* sub = app.add_subcommand(
      "check-config", "Check a config file and report every error as FILE:LINE:COL: KEY: MESSAGE");
  sub->add_option("file", flags->file, "YAML config file, e.g. config/nightjar.yaml");
  sub->add_flag("--print-defaults", flags->print_defaults,
                "Print every key with its default, unit and range (a valid config file)");
  return Command{sub, [flags] { return RunCheckConfig(*flags); }};
}

}  // namespace nightjar::daemon
