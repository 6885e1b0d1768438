#include "service/worker_state.h"

#include <spdlog/spdlog.h>

#include <chrono>
#include <filesystem>
#include <system_error>

#include "core/alarm_episodes.h"
#include "service/shard.h"
#include "state/state_directory.h"

namespace nightjar::service {
namespace {

void LogEntry(int index, const state::LoadEntry& entry) {
  if (entry.outcome == state::LoadOutcome::kLoaded) {
    spdlog::info("worker {}: state: {}", index, entry.message);
  } else {
    spdlog::warn("worker {}: state: {}; the channel starts fresh", index, entry.message);
  }
}

}  // namespace

WorkerStateStore::WorkerStateStore(int worker_index, WorkerStateOptions options)
    : index_(worker_index), options_(std::move(options)) {}

bool WorkerStateStore::Owns(std::string_view channel) const {
  if (channel.empty()) return index_ == 0;
  const std::string asset = core::AssetOfChannel(
      channel, options_.resolver ? options_.resolver(channel).asset : std::string());
  return ShardFor(channel, asset, static_cast<std::size_t>(options_.worker_count)) ==
         static_cast<std::size_t>(index_);
}

void WorkerStateStore::LoadAtStart(core::Engine& engine) {
  if (options_.load_dir.empty()) return;
  core::Result<std::vector<std::string>> files = state::ListStateFiles(options_.load_dir);
  if (!files.ok()) {
    // Only worker 0 speaks for the folder as a whole: one line, not one per worker.
    if (index_ != 0) return;
    if (files.status().code() == core::StatusCode::kNotFound) {
      spdlog::info("state: {}: no checkpoints yet; every channel starts fresh", options_.load_dir);
    } else {
      spdlog::warn("state: {}; every channel starts fresh", files.status().message());
    }
    return;
  }
  std::size_t loaded = 0;
  std::size_t problems = 0;
  const auto owns = [this](std::string_view channel) { return Owns(channel); };
  for (const std::string& file : *files) {
    looked_at_.insert(file);
    const std::optional<state::LoadEntry> entry = state::LoadStateFile(engine, file, owns);
    if (!entry) continue;
    LogEntry(index_, *entry);
    ++(entry->outcome == state::LoadOutcome::kLoaded ? loaded : problems);
  }
  spdlog::info("worker {}: state: {} channel{} loaded from {}, {} file{} with problems", index_,
               loaded, loaded == 1 ? "" : "s", options_.load_dir, problems,
               problems == 1 ? "" : "s");
}

bool WorkerStateStore::LoadNewChannel(core::Engine& engine, std::string_view channel) {
  if (options_.load_dir.empty()) return false;
  const std::string file =
      (std::filesystem::path(options_.load_dir) / state::StateFileName(channel)).string();
  // Once per file: a bad file is reported once, not on every sample of its channel.
  if (!looked_at_.insert(file).second) return false;
  std::error_code error;
  if (!std::filesystem::exists(file, error)) return false;
  const std::optional<state::LoadEntry> entry = state::LoadStateFile(engine, file);
  LogEntry(index_, *entry);
  return entry->outcome == state::LoadOutcome::kLoaded;
}

CheckpointResult WorkerStateStore::Save(const core::Engine& engine, std::string_view why,
                                        std::vector<char>* unsaved) {
  CheckpointResult result;
  if (!saves()) return result;
  const auto start = std::chrono::steady_clock::now();
  written_.clear();
  const auto fail = [&](const core::Status& problem) {
    // The old checkpoint of that channel stays; the next one tries again. One line
    // per checkpoint: a full disk must not write a line per channel.
    if (++result.failed == 1) {
      spdlog::error("worker {}: checkpoint ({}): {}", index_, why, problem.message());
    }
  };
  const core::Status folder = state::CreateStateDirectory(options_.save_dir);
  for (core::ChannelId id = 0; id < engine.channel_count(); ++id) {
    const bool flagged = unsaved != nullptr && id < unsaved->size();
    if (flagged && (*unsaved)[id] == 0) {
      ++result.unchanged;
      continue;
    }
    if (!folder.ok()) {
      fail(folder);
      continue;
    }
    bytes_.clear();
    engine.SaveChannel(id, bytes_);
    const core::Status written =
        state::WriteStateFileUnsynced(options_.save_dir, engine.channel_name(id), bytes_);
    if (written.ok()) {
      written_.push_back(id);
      result.bytes += bytes_.size();
    } else {
      fail(written);
    }
  }
  // One folder fsync for the whole checkpoint makes every rename above durable; if it
  // fails, none of them is known to be on disk, so they count as failed and stay unsaved.
  const core::Status synced =
      written_.empty() ? core::Status::Ok() : state::SyncStateDirectory(options_.save_dir);
  if (synced.ok()) {
    result.written = written_.size();
    if (unsaved != nullptr) {
      for (const core::ChannelId id : written_) {
        if (id < unsaved->size()) (*unsaved)[id] = 0;
      }
    }
  } else {
    result.bytes = 0;
    for (std::size_t i = 0; i < written_.size(); ++i) fail(synced);
  }
  result.seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  spdlog::info(
      "worker {}: checkpoint ({}): {} channel{} written to {} ({} bytes, {:.1f} ms), {} "
      "unchanged{}",
      index_, why, result.written, result.written == 1 ? "" : "s", options_.save_dir, result.bytes,
      result.seconds * 1e3, result.unchanged,
      result.failed == 0 ? "" : ", " + std::to_string(result.failed) + " failed");
  return result;
}

}  // namespace nightjar::service
