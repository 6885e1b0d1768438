// A state directory: one checkpoint file (core/channel_state.h) per channel, written
// atomically, read back with a report per file. Format: lib/state/FORMAT.md.
//
// File names come from channel names by StateFileName: bytes A-Z a-z 0-9 '.' '_' '-'
// stay, every other byte (and a leading '.') becomes %XX (two upper-case hex digits),
// then ".njstate" is appended, so "cw2.pump_a.flow" -> "cw2.pump_a.flow.njstate" and
// "line 3/temp" -> "line%203%2Ftemp.njstate": one flat folder, no hidden files, no "..",
// and two channels never share a file.
//
// Saving writes <file>.tmp, fsyncs it, renames it over <file> and fsyncs the folder, so
// a crash leaves the old checkpoint or the new one, never half of one. Writing many files
// at once (a checkpoint) fsyncs the folder once after all the renames: until then a crash
// may leave some of them at their old checkpoint, each still whole. Loading never
// throws and never stops at a bad file: every file gets a LoadEntry saying what became
// of it. Thread-safety: functions use only their arguments; do not save one directory
// from two threads at once. Ownership: plain values.
#pragma once

#include <cstdint>
#include <functional>
#include <optional>
#include <span>
#include <string>
#include <string_view>
#include <vector>

#include "core/engine.h"
#include "core/status.h"

namespace nightjar::state {

inline constexpr std::string_view kStateFileSuffix = ".njstate";

std::string StateFileName(std::string_view channel);

// Writes `bytes` as the checkpoint of `channel` in `dir` (created if missing), durably:
// CreateStateDirectory, WriteStateFileUnsynced, SyncStateDirectory.
core::Status WriteStateFile(const std::string& dir, std::string_view channel,
                            std::span<const std::uint8_t> bytes);

// Creates `dir` (and its parents) if missing; Unavailable naming it when that fails.
core::Status CreateStateDirectory(const std::string& dir);
// Writes `bytes` as the checkpoint of `channel` in the existing folder `dir`: temp file,
// fsync, rename over the file (the temp file is removed on failure). The new file is
// whole at once, but the rename is durable only after SyncStateDirectory(dir).
core::Status WriteStateFileUnsynced(const std::string& dir, std::string_view channel,
                                    std::span<const std::uint8_t> bytes);
// fsyncs the folder itself, making every rename done in it so far durable.
core::Status SyncStateDirectory(const std::string& dir);

// Checkpoints every channel of `engine` into `dir`, with one folder fsync at the end;
// the first failure is returned, the other channels are still written.
core::Status SaveEngineState(const core::Engine& engine, const std::string& dir);

enum class LoadOutcome {
  kLoaded,
  kMissing,  // a channel the engine has, with no file: it starts fresh
  kUnreadable,
  kTruncated,
  kCorrupt,
  kVersionMismatch,
  kChannelMismatch,  // the file holds another channel than its name says
  kOptionsMismatch,
  kRejected,  // the engine refused the channel (its options are invalid)
};
const char* LoadOutcomeName(LoadOutcome outcome);

struct LoadEntry {
  std::string channel;  // from the file's header where readable, else from the engine
  std::string file;     // full path
  LoadOutcome outcome = LoadOutcome::kLoaded;
  std::string message;  // "<file>: <outcome>: <detail>", one line for a log
};

struct LoadReport {
  std::vector<LoadEntry> entries;  // sorted by file name
  std::size_t loaded() const;
  std::size_t problems() const;  // neither loaded nor missing
};

// Loads every *.njstate file in `dir` into `engine`, and lists as missing the channels
// the engine already had with no file. A missing or unreadable folder gives one entry
// (kUnreadable, with `dir` as file). Channels whose file failed keep whatever they had
// (a new channel starts fresh on its first sample).
LoadReport LoadEngineState(core::Engine& engine, const std::string& dir);

// The *.njstate files in `dir`, full paths, sorted; Unavailable naming `dir` when the
// folder cannot be listed (NotFound when it does not exist).
core::Result<std::vector<std::string>> ListStateFiles(const std::string& dir);

// Whether a shard owns `channel`; called with "" for a file whose header cannot be read.
using ChannelFilter = std::function<bool(std::string_view channel)>;

// Loads one state file into `engine` (the checks and outcomes of LoadEngineState).
// With `owns` set, a file of a channel it refuses is left alone and nullopt returned:
// shards of one engine per thread each load their own channels from one folder.
std::optional<LoadEntry> LoadStateFile(core::Engine& engine, const std::string& file,
                                       const ChannelFilter& owns = {});

}  // namespace nightjar::state
