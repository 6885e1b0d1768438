#include "state_in.h"

#include <cstdio>

#include "state/state_directory.h"

namespace nightjar::daemon {

std::function<core::Status(core::Engine&)> LoadStateHook(const std::string& command,
                                                         const std::string& dir) {
  return [command, dir](core::Engine& engine) {
    const state::LoadReport report = state::LoadEngineState(engine, dir);
    for (const state::LoadEntry& entry : report.entries) {
      if (entry.outcome == state::LoadOutcome::kUnreadable && entry.file == dir) {
        return core::Status::NotFound("--state-in " + entry.message);
      }
    }
    std::size_t fresh = 0;
    for (const state::LoadEntry& entry : report.entries) {
      if (entry.outcome == state::LoadOutcome::kLoaded) continue;
      if (entry.outcome == state::LoadOutcome::kMissing) {
        ++fresh;
        continue;
      }
      std::fprintf(stderr, "nightjar %s: state: %s; the channel starts fresh\n", command.c_str(),
                   entry.message.c_str());
    }
    std::fprintf(stderr,
                 "nightjar %s: state: %zu channel%s loaded from %s, %zu with no file, "
                 "%zu refused\n",
                 command.c_str(), report.loaded(), report.loaded() == 1 ? "" : "s", dir.c_str(),
                 fresh, report.problems());
    return core::Status::Ok();
  };
}

}  // namespace nightjar::daemon
