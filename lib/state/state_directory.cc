#include "state/state_directory.h"

#include <fcntl.h>
#include <unistd.h>

#include <algorithm>
#include <cerrno>
#include <cstdio>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <iterator>
#include <set>
#include <system_error>

#include "core/channel_state.h"

namespace nightjar::state {
namespace {

namespace fs = std::filesystem;

bool KeepsItsByte(unsigned char c, bool first) {
  if (first && c == '.') return false;
  return (c >= 'A' && c <= 'Z') || (c >= 'a' && c <= 'z') || (c >= '0' && c <= '9') || c == '.' ||
         c == '_' || c == '-';
}

core::Status ErrnoStatus(const std::string& what, const std::string& path) {
  return core::Status::Unavailable(path + ": " + what + ": " + std::strerror(errno));
}

core::Status WriteAll(int fd, std::span<const std::uint8_t> bytes, const std::string& path) {
  std::size_t done = 0;
  while (done < bytes.size()) {
    const ssize_t n = ::write(fd, bytes.data() + done, bytes.size() - done);
    if (n < 0) {
      if (errno == EINTR) continue;
      return ErrnoStatus("write", path);
    }
    done += static_cast<std::size_t>(n);
  }
  return core::Status::Ok();
}

LoadOutcome FromProblem(core::StateProblem problem) {
  switch (problem) {
    case core::StateProblem::kNone:
      return LoadOutcome::kLoaded;
    case core::StateProblem::kTruncated:
      return LoadOutcome::kTruncated;
    case core::StateProblem::kCorrupt:
      return LoadOutcome::kCorrupt;
    case core::StateProblem::kVersionMismatch:
      return LoadOutcome::kVersionMismatch;
    case core::StateProblem::kChannelMismatch:
      return LoadOutcome::kChannelMismatch;
    case core::StateProblem::kOptionsMismatch:
      return LoadOutcome::kOptionsMismatch;
  }
  return LoadOutcome::kCorrupt;
}

LoadEntry Entry(std::string channel, std::string file, LoadOutcome outcome,
                const std::string& detail) {
  LoadEntry entry{std::move(channel), std::move(file), outcome, {}};
  // Core messages start with the problem's name already ("corrupt: CRC-32 ...").
  const std::string name = LoadOutcomeName(outcome);
  entry.message = entry.file + ": ";
  if (detail.rfind(name + ":", 0) != 0) entry.message += detail.empty() ? name : name + ": ";
  entry.message += detail;
  return entry;
}

}  // namespace

std::string StateFileName(std::string_view channel) {
  static constexpr char kHex[] = "0123456789ABCDEF";
  std::string name;
  for (std::size_t i = 0; i < channel.size(); ++i) {
    const auto c = static_cast<unsigned char>(channel[i]);
    if (KeepsItsByte(c, i == 0)) {
      name.push_back(static_cast<char>(c));
    } else {
      name.push_back('%');
      name.push_back(kHex[c >> 4]);
      name.push_back(kHex[c & 0xF]);
    }
  }
  name.append(kStateFileSuffix);
  return name;
}

core::Status CreateStateDirectory(const std::string& dir) {
  std::error_code error;
  fs::create_directories(dir, error);
  if (error) return core::Status::Unavailable(dir + ": cannot create: " + error.message());
  return core::Status::Ok();
}

core::Status WriteStateFileUnsynced(const std::string& dir, std::string_view channel,
                                    std::span<const std::uint8_t> bytes) {
  const std::string path = (fs::path(dir) / StateFileName(channel)).string();
  const std::string temp = path + ".tmp";
  const int fd = ::open(temp.c_str(), O_WRONLY | O_CREAT | O_TRUNC | O_CLOEXEC, 0644);
  if (fd < 0) return ErrnoStatus("open", temp);
  core::Status status = WriteAll(fd, bytes, temp);
  if (status.ok() && ::fsync(fd) != 0) status = ErrnoStatus("fsync", temp);
  if (::close(fd) != 0 && status.ok()) status = ErrnoStatus("close", temp);
  if (status.ok() && std::rename(temp.c_str(), path.c_str()) != 0) {
    status = ErrnoStatus("rename to " + path, temp);
  }
  if (!status.ok()) ::unlink(temp.c_str());
  return status;
}

core::Status SyncStateDirectory(const std::string& dir) {
  const int dir_fd = ::open(dir.c_str(), O_RDONLY | O_DIRECTORY | O_CLOEXEC);
  if (dir_fd < 0) return ErrnoStatus("open", dir);
  core::Status status;
  if (::fsync(dir_fd) != 0) status = ErrnoStatus("fsync", dir);
  ::close(dir_fd);
  return status;
}

core::Status WriteStateFile(const std::string& dir, std::string_view channel,
                            std::span<const std::uint8_t> bytes) {
  if (core::Status s = CreateStateDirectory(dir); !s.ok()) return s;
  if (core::Status s = WriteStateFileUnsynced(dir, channel, bytes); !s.ok()) return s;
  // The rename is durable only once the folder itself is on disk.
  return SyncStateDirectory(dir);
}

core::Status SaveEngineState(const core::Engine& engine, const std::string& dir) {
  if (core::Status s = CreateStateDirectory(dir); !s.ok()) return s;
  core::Status first;
  std::vector<std::uint8_t> bytes;
  bool renamed = false;
  for (core::ChannelId id = 0; id < engine.channel_count(); ++id) {
    bytes.clear();
    engine.SaveChannel(id, bytes);
    core::Status written = WriteStateFileUnsynced(dir, engine.channel_name(id), bytes);
    renamed = renamed || written.ok();
    if (!written.ok() && first.ok()) first = std::move(written);
  }
  // One folder fsync makes every rename above durable.
  if (renamed) {
    core::Status synced = SyncStateDirectory(dir);
    if (!synced.ok() && first.ok()) first = std::move(synced);
  }
  return first;
}

const char* LoadOutcomeName(LoadOutcome outcome) {
  switch (outcome) {
    case LoadOutcome::kLoaded:
      return "loaded";
    case LoadOutcome::kMissing:
      return "missing";
    case LoadOutcome::kUnreadable:
      return "unreadable";
    case LoadOutcome::kTruncated:
      return "truncated";
    case LoadOutcome::kCorrupt:
      return "corrupt";
    case LoadOutcome::kVersionMismatch:
      return "version mismatch";
    case LoadOutcome::kChannelMismatch:
      return "channel mismatch";
    case LoadOutcome::kOptionsMismatch:
      return "options mismatch";
    case LoadOutcome::kRejected:
      return "rejected";
  }
  return "unknown";
}

std::size_t LoadReport::loaded() const {
  return static_cast<std::size_t>(std::count_if(entries.begin(), entries.end(), [](const auto& e) {
    return e.outcome == LoadOutcome::kLoaded;
  }));
}

std::size_t LoadReport::problems() const {
  return static_cast<std::size_t>(std::count_if(entries.begin(), entries.end(), [](const auto& e) {
    return e.outcome != LoadOutcome::kLoaded && e.outcome != LoadOutcome::kMissing;
  }));
}

core::Result<std::vector<std::string>> ListStateFiles(const std::string& dir) {
  std::vector<std::string> files;
  std::error_code error;
  fs::directory_iterator it(dir, error);
  if (error) {
    const std::string text = dir + ": " + error.message();
    if (error == std::errc::no_such_file_or_directory) return core::Status::NotFound(text);
    return core::Status::Unavailable(text);
  }
  for (; it != fs::directory_iterator(); it.increment(error)) {
    if (error) return core::Status::Unavailable(dir + ": " + error.message());
    const std::string name = it->path().filename().string();
    if (name.size() > kStateFileSuffix.size() && name.ends_with(kStateFileSuffix)) {
      files.push_back(it->path().string());
    }
  }
  std::sort(files.begin(), files.end());
  return files;
}

std::optional<LoadEntry> LoadStateFile(core::Engine& engine, const std::string& file,
                                       const ChannelFilter& owns) {
  std::ifstream in(file, std::ios::binary);
  if (!in.is_open()) {
    if (owns && !owns({})) return std::nullopt;
    return Entry({}, file, LoadOutcome::kUnreadable, std::strerror(errno));
  }
  const std::vector<std::uint8_t> bytes((std::istreambuf_iterator<char>(in)),
                                        std::istreambuf_iterator<char>());
  if (in.bad()) {
    if (owns && !owns({})) return std::nullopt;
    return Entry({}, file, LoadOutcome::kUnreadable, "read error");
  }
  core::StateProblem framing = core::StateProblem::kNone;
  core::Result<std::string> named = core::PeekChannelName(bytes, &framing);
  if (!named.ok()) {
    if (owns && !owns({})) return std::nullopt;
    return Entry({}, file, FromProblem(framing), named.status().message());
  }
  const std::string& channel = *named;
  if (owns && !owns(channel)) return std::nullopt;
  if (fs::path(file).filename().string() != StateFileName(channel)) {
    return Entry(channel, file, LoadOutcome::kChannelMismatch,
                 "holds channel '" + channel + "', whose file is " + StateFileName(channel));
  }
  core::StateProblem problem = core::StateProblem::kNone;
  const core::Status loaded = engine.LoadChannel(channel, bytes, &problem);
  if (loaded.ok()) return Entry(channel, file, LoadOutcome::kLoaded, {});
  const LoadOutcome outcome =
      problem == core::StateProblem::kNone ? LoadOutcome::kRejected : FromProblem(problem);
  return Entry(channel, file, outcome, loaded.message());
}

LoadReport LoadEngineState(core::Engine& engine, const std::string& dir) {
  LoadReport report;
  core::Result<std::vector<std::string>> files = ListStateFiles(dir);
  if (!files.ok()) {
    // The message already starts with `dir`.
    const std::string text = files.status().message();
    report.entries.push_back(Entry({}, dir, LoadOutcome::kUnreadable,
                                   text.substr(std::min(text.size(), dir.size() + 2))));
    return report;
  }
  std::set<std::string> covered;
  for (const std::string& file : *files) {
    std::optional<LoadEntry> entry = LoadStateFile(engine, file);
    if (entry->outcome == LoadOutcome::kLoaded) covered.insert(entry->channel);
    report.entries.push_back(std::move(*entry));
  }
  for (core::ChannelId id = 0; id < engine.channel_count(); ++id) {
    const std::string& channel = engine.channel_name(id);
    if (covered.count(channel) != 0) continue;
    const std::string file = (fs::path(dir) / StateFileName(channel)).string();
    const bool had_file = std::any_of(report.entries.begin(), report.entries.end(),
                                      [&](const LoadEntry& e) { return e.file == file; });
    if (had_file) continue;
    report.entries.push_back(Entry(channel, file, LoadOutcome::kMissing, "starts fresh"));
  }
  return report;
}

}  // namespace nightjar::state
