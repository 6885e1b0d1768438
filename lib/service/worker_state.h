// WorkerStateStore: one engine worker's side of the state directory (lib/state): loads the
// channels it owns at start (and a channel first seen later, if its file appeared after
// the start), and checkpoints all of its channels on request.
//
// Several workers share one folder: each loads only the files of channels it owns (the
// same ShardFor as the runtime's routing; a file whose header cannot be read is reported
// by worker 0) and writes only its own channels' files, so no two threads ever touch one
// file. Every file looked at gets one log line naming it (loaded, corrupt, options
// mismatch, ...); a bad file means that channel starts fresh, never a stop.
//
// Thread-safety: the owning worker thread only. Ownership: plain values; the engine is
// borrowed per call.
#pragma once

#include <cstdint>
#include <set>
#include <string>
#include <string_view>
#include <vector>

#include "core/engine.h"

namespace nightjar::service {

struct WorkerStateOptions {
  std::string load_dir;  // read at start: `--state-in DIR`, else daemon.state_dir; "" = none
  std::string save_dir;  // daemon.state_dir; "" = no checkpoints
  int worker_count = 1;
  // Channel options of the config (their `asset` decides the worker, shard.h); empty:
  // the built-in defaults.
  core::ChannelOptionsResolver resolver;
};

struct CheckpointResult {
  std::size_t written = 0;
  std::size_t unchanged = 0;  // not written: unchanged since their last checkpoint
  std::size_t failed = 0;
  std::uint64_t bytes = 0;
  double seconds = 0.0;
};

class WorkerStateStore {
 public:
  WorkerStateStore(int worker_index, WorkerStateOptions options);

  // Loads every file in load_dir whose channel this worker owns. A missing load_dir is
  // one info line (a first start); an unreadable one a warning.
  void LoadAtStart(core::Engine& engine);
  // For a channel the engine does not have yet: loads its file when there is one that
  // LoadAtStart did not already look at. Whether the engine now has the channel.
  bool LoadNewChannel(core::Engine& engine, std::string_view channel);
  // Writes every channel of `engine` to save_dir (temp file, fsync, rename each, then one
  // fsync of the folder for all); one log line (`why`: "interval", "stop"), and one for
  // the first failure. Nothing without save_dir.
  // With `unsaved` (a flag by ChannelId; an id past its end counts as set) only channels
  // whose flag is set are written, and a written one's flag is cleared: a channel that has
  // not changed since its last checkpoint has that state on disk already. A failed write
  // leaves the flag set, so the next checkpoint tries again.
  CheckpointResult Save(const core::Engine& engine, std::string_view why,
                        std::vector<char>* unsaved = nullptr);

  bool saves() const { return !options_.save_dir.empty(); }
  // Whether a channel loaded from load_dir is in save_dir as it was loaded (same folder).
  bool loads_from_save_dir() const { return options_.load_dir == options_.save_dir; }

 private:
  bool Owns(std::string_view channel) const;

  const int index_;
  const WorkerStateOptions options_;
  std::set<std::string> looked_at_;       // files of load_dir already tried
  std::vector<std::uint8_t> bytes_;       // reused by Save
  std::vector<core::ChannelId> written_;  // Save: renamed, waiting for the folder fsync
};

}  // namespace nightjar::service
