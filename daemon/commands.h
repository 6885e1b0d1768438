// The list of subcommands beyond version/help. Adding one: write daemon/<name>.cc with
// `Command Add<Name>Command(CLI::App& app)`, declare it here and append it in commands.cc.
#pragma once

#include <CLI/CLI.hpp>
#include <vector>

#include "command.h"

namespace nightjar::daemon {

std::vector<Command> AddCommands(CLI::App& app);
Command AddCheckConfigCommand(CLI::App& app);
Command AddReplayCommand(CLI::App& app);
Command AddRunCommand(CLI::App& app);
Command AddLearnCommand(CLI::App& app);
Command AddTuneCommand(CLI::App& app);

}  // namespace nightjar::daemon
