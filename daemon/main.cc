// nightjar: one binary, one subcommand per job. main only parses and dispatches.
#include <CLI/CLI.hpp>
#include <cstdio>
#include <string>
#include <vector>

#include "build_info.h"
#include "command.h"
#include "commands.h"

namespace {

int PrintVersion() {
  std::printf("nightjar %s (%s build, %s)\n", nightjar::daemon::kVersion,
              nightjar::daemon::kBuildType, nightjar::daemon::kCompiler);
  return 0;
}

}  // namespace

int main(int argc, char** argv) {
  CLI::App app{
      "nightjar: learns each sensor channel's normal behaviour and raises advisory "
      "alerts when it departs from it.",
      "nightjar"};
  app.require_subcommand(0, 1);
  app.set_help_all_flag("--help-all", "Show help for every subcommand");

  CLI::App* version = app.add_subcommand("version", "Print the version and build facts");
  CLI::App* help = app.add_subcommand("help", "Show this help");
  const std::vector<nightjar::daemon::Command> commands = nightjar::daemon::AddCommands(app);

  // Taken before parsing: afterwards CLI11 formats the chosen subcommand's help instead.
  const std::string top_level_help = app.help();
  try {
    app.parse(argc, argv);
  } catch (const CLI::ParseError& error) {
    // --help and --version print and succeed; every real parse error is a usage error.
    return app.exit(error) == 0 ? 0 : 2;
  }

  if (version->parsed()) return PrintVersion();
  for (const auto& command : commands) {
    if (command.app->parsed()) return command.run();
  }
  std::fputs(top_level_help.c_str(), stdout);
  return help->parsed() ? 0 : 2;
}
