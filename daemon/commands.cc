#include "commands.h"

namespace nightjar::daemon {

std::vector<Command> AddCommands(CLI::App& app) {
  std::vector<Command> commands;
  // One line per subcommand, e.g. commands.push_back(AddReplayCommand(app));
  commands.push_back(AddCheckConfigCommand(app));
  commands.push_back(AddReplayCommand(app));
  commands.push_back(AddRunCommand(app));
  commands.push_back(AddLearnCommand(app));
  commands.push_back(AddTuneCommand(app));
  return commands;
}

}  // namespace nightjar::daemon
