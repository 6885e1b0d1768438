// `--state-in DIR` for the subcommands that replay a recording (replay, tune): loads the
// channels' checkpoints into the engine before the first row.
//
// Thread-safety: the returned function may run on several replay threads at once (one
// fprintf per line keeps stderr lines whole). Ownership: it holds copies of its arguments.
#pragma once

#include <functional>
#include <string>

#include "core/engine.h"
#include "core/status.h"

namespace nightjar::daemon {

// An on_engine_ready hook (replay/replay_runner.h): channels whose checkpoint is in `dir`
// start from it, armed at once; a corrupt, truncated or mismatched file is named on stderr
// as "nightjar <command>: state: ..." and its channel starts fresh, as do channels with no
// file; one line counts loaded, missing and refused files. A folder that cannot be read
// is NotFound ("--state-in ..."), which fails the recording.
std::function<core::Status(core::Engine&)> LoadStateHook(const std::string& command,
                                                         const std::string& dir);

}  // namespace nightjar::daemon
