// How a subcommand plugs into the `nightjar` binary.
//
// Each subcommand lives in its own file (replay.cc, check_config.cc, ...) and exposes one
// Add<Name>Command function that declares its flags on a CLI11 subcommand and returns
// the Command that main runs when that subcommand was chosen. Runs return the process
// exit code: 0 success, 1 the job failed (bad input, errors printed), 2 usage errors.
#pragma once

#include <CLI/CLI.hpp>
#include <functional>

namespace nightjar::daemon {

struct Command {
  CLI::App* app = nullptr;   // the CLI11 subcommand, owned by the parent app
  std::function<int()> run;  // called after parsing when app->parsed()
};

}  // namespace nightjar::daemon
