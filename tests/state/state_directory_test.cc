// The state directory (state/state_directory.h): safe file names, atomic writes, and a
// per-file report for loaded, missing, corrupt, truncated, renamed and mismatched files.
// The core's CRC-32 is checked against zlib's crc32 (Debian zlib1g, the reference
// implementation of CRC-32/ISO-HDLC) on random buffers.
#include "state/state_directory.h"

#include <gtest/gtest.h>
#include <unistd.h>
#include <zlib.h>

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <iterator>
#include <numbers>
#include <random>
#include <string>
#include <vector>

#include "core/channel_state.h"
#include "core/crc32.h"
#include "core/engine.h"

namespace nightjar::state {
namespace {

namespace fs = std::filesystem;
using core::ChannelState;
using core::Engine;
using core::EngineOptions;

constexpr core::TimestampUs kStart = 1'780'000'000LL * core::kMicrosPerSecond;
const std::vector<std::string> kChannels = {"cw2.pump_a.flow", "cw2.tank.level"};

EngineOptions SmallModel(int hidden = 8) {
  EngineOptions options;
  options.defaults.warmup_samples = 300;
  options.defaults.predictor.hidden_size = hidden;
  options.defaults.predictor.window = 8;
  return options;
}

// Feeds an engine whose two channels have seen `samples` samples (armed after 300).
void Feed(Engine& engine, int samples) {
  std::mt19937_64 rng(5);
  std::normal_distribution<double> noise(0.0, 0.2);
  std::vector<core::Alert> alerts;
  for (int i = 0; i < samples; ++i) {
    const core::TimestampUs t = kStart + i * core::kMicrosPerSecond;
    engine.Process({kChannels[0], t, 50.0 + 5.0 * std::sin(i / 40.0) + noise(rng)}, alerts);
    engine.Process({kChannels[1], t, 60.0 + noise(rng)}, alerts);
  }
}

class StateDirectoryTest : public ::testing::Test {
 protected:
  void SetUp() override {
    dir_ = (fs::path(::testing::TempDir()) /
            ("nightjar_state_" + std::to_string(::getpid()) + "_" +
             ::testing::UnitTest::GetInstance()->current_test_info()->name()))
               .string();
    fs::remove_all(dir_);
  }
  void TearDown() override { fs::remove_all(dir_); }

  void SaveTrained(int samples = 600) {
    Engine engine(SmallModel());
    Feed(engine, samples);
    ASSERT_TRUE(SaveEngineState(engine, dir_).ok());
  }
  std::string PathOf(const std::string& channel) const {
    return (fs::path(dir_) / StateFileName(channel)).string();
  }
  std::vector<std::uint8_t> Read(const std::string& path) const {
    std::ifstream in(path, std::ios::binary);
    return {std::istreambuf_iterator<char>(in), std::istreambuf_iterator<char>()};
  }
  void Write(const std::string& path, const std::vector<std::uint8_t>& bytes) const {
    std::ofstream out(path, std::ios::binary | std::ios::trunc);
    out.write(reinterpret_cast<const char*>(bytes.data()),
              static_cast<std::streamsize>(bytes.size()));
  }
  const LoadEntry* EntryFor(const LoadReport& report, const std::string& file) const {
    for (const LoadEntry& e : report.entries) {
      if (e.file == file) return &e;
    }
    return nullptr;
  }

  std::string dir_;
};

TEST(StateFileNameTest, SafeAndDistinct) {
  EXPECT_EQ(StateFileName("cw2.pump_a.flow"), "cw2.pump_a.flow.njstate");
  EXPECT_EQ(StateFileName("line 3/temp"), "line%203%2Ftemp.njstate");
  EXPECT_EQ(StateFileName(".."), "%2E..njstate");
  EXPECT_EQ(StateFileName("a%2Fb"), "a%252Fb.njstate");  // '%' itself is escaped
  EXPECT_NE(StateFileName("a/b"), StateFileName("a%2Fb"));
}

TEST(Crc32ZlibTest, MatchesZlib) {
  std::mt19937_64 rng(3);
  for (const std::size_t size : {0, 1, 7, 64, 1000, 65537}) {
    std::vector<std::uint8_t> bytes(size);
    for (auto& b : bytes) b = static_cast<std::uint8_t>(rng());
    const uLong expected = ::crc32(::crc32(0L, Z_NULL, 0), bytes.data(), static_cast<uInt>(size));
    EXPECT_EQ(core::Crc32(bytes), static_cast<std::uint32_t>(expected)) << size;
  }
}

TEST_F(StateDirectoryTest, RoundTripArmsAtOnce) {
  SaveTrained();
  for (const std::string& channel : kChannels) EXPECT_TRUE(fs::exists(PathOf(channel)));
  for (const auto& entry : fs::directory_iterator(dir_)) {
    EXPECT_EQ(entry.path().extension(), ".njstate") << "left over: " << entry.path();
  }
  Engine engine(SmallModel());
  const LoadReport report = LoadEngineState(engine, dir_);
  ASSERT_EQ(report.entries.size(), 2U);
  EXPECT_EQ(report.loaded(), 2U);
  for (const std::string& channel : kChannels) {
    const std::optional<core::ChannelId> id = engine.FindChannel(channel);
    ASSERT_TRUE(id.has_value());
    EXPECT_EQ(engine.channel_status(*id).state, ChannelState::kArmed);
  }
}

TEST_F(StateDirectoryTest, EveryProblemNamesItsFile) {
  SaveTrained();
  // Flipped byte in one, the other truncated.
  std::vector<std::uint8_t> flow = Read(PathOf(kChannels[0]));
  flow[flow.size() / 3] ^= 0x01;
  Write(PathOf(kChannels[0]), flow);
  std::vector<std::uint8_t> level = Read(PathOf(kChannels[1]));
  level.resize(level.size() - 100);
  Write(PathOf(kChannels[1]), level);

  Engine engine(SmallModel());
  ASSERT_TRUE(engine.AddChannel("cw2.pump_a.motor_current").ok());  // has no file
  const LoadReport report = LoadEngineState(engine, dir_);
  ASSERT_EQ(report.entries.size(), 3U);
  EXPECT_EQ(report.loaded(), 0U);
  EXPECT_EQ(report.problems(), 2U);
  const LoadEntry* corrupt = EntryFor(report, PathOf(kChannels[0]));
  ASSERT_NE(corrupt, nullptr);
  EXPECT_EQ(corrupt->outcome, LoadOutcome::kCorrupt);
  EXPECT_EQ(corrupt->message.rfind(PathOf(kChannels[0]), 0), 0U) << corrupt->message;
  const LoadEntry* truncated = EntryFor(report, PathOf(kChannels[1]));
  ASSERT_NE(truncated, nullptr);
  EXPECT_EQ(truncated->outcome, LoadOutcome::kTruncated) << truncated->message;
  const LoadEntry* missing = EntryFor(report, PathOf("cw2.pump_a.motor_current"));
  ASSERT_NE(missing, nullptr);
  EXPECT_EQ(missing->outcome, LoadOutcome::kMissing);
  // Nothing half-loaded: the damaged channels do not exist yet and start fresh.
  EXPECT_FALSE(engine.FindChannel(kChannels[0]).has_value());
  EXPECT_FALSE(engine.FindChannel(kChannels[1]).has_value());
}

TEST_F(StateDirectoryTest, DamagedFileOfAKnownChannelIsNotAlsoMissing) {
  SaveTrained();
  std::vector<std::uint8_t> flow = Read(PathOf(kChannels[0]));
  flow[20] ^= 0x01;
  Write(PathOf(kChannels[0]), flow);
  Engine engine(SmallModel());
  ASSERT_TRUE(engine.AddChannel(kChannels[0]).ok());  // as replay does before loading
  const LoadReport report = LoadEngineState(engine, dir_);
  ASSERT_EQ(report.entries.size(), 2U);
  EXPECT_EQ(report.loaded(), 1U);
  EXPECT_EQ(report.problems(), 1U);
  const LoadEntry* corrupt = EntryFor(report, PathOf(kChannels[0]));
  ASSERT_NE(corrupt, nullptr);
  EXPECT_EQ(corrupt->message, PathOf(kChannels[0]) + ": corrupt: CRC-32 mismatch" +
                                  corrupt->message.substr(corrupt->message.find(" (stored")));
  EXPECT_EQ(engine.channel_status(*engine.FindChannel(kChannels[0])).state,
            ChannelState::kLearning);
}

TEST_F(StateDirectoryTest, RenamedFileIsAnotherChannels) {
  SaveTrained();
  fs::remove(PathOf(kChannels[1]));
  fs::rename(PathOf(kChannels[0]), PathOf(kChannels[1]));
  Engine engine(SmallModel());
  const LoadReport report = LoadEngineState(engine, dir_);
  ASSERT_EQ(report.entries.size(), 1U);
  EXPECT_EQ(report.entries[0].outcome, LoadOutcome::kChannelMismatch);
  EXPECT_NE(report.entries[0].message.find(kChannels[0]), std::string::npos);
  EXPECT_EQ(engine.channel_count(), 0U);
}

TEST_F(StateDirectoryTest, ChangedModelIsAnOptionsMismatch) {
  SaveTrained();
  Engine engine(SmallModel(12));
  const LoadReport report = LoadEngineState(engine, dir_);
  ASSERT_EQ(report.entries.size(), 2U);
  for (const LoadEntry& entry : report.entries) {
    EXPECT_EQ(entry.outcome, LoadOutcome::kOptionsMismatch) << entry.message;
  }
}

TEST_F(StateDirectoryTest, MissingFolderIsOneUnreadableEntry) {
  Engine engine(SmallModel());
  const LoadReport report = LoadEngineState(engine, dir_ + "/nope");
  ASSERT_EQ(report.entries.size(), 1U);
  EXPECT_EQ(report.entries[0].outcome, LoadOutcome::kUnreadable);
  EXPECT_NE(report.entries[0].message.find("nope"), std::string::npos);
}

TEST_F(StateDirectoryTest, OverwriteReplacesTheCheckpoint) {
  SaveTrained(400);
  const std::vector<std::uint8_t> first = Read(PathOf(kChannels[0]));
  SaveTrained(700);
  const std::vector<std::uint8_t> second = Read(PathOf(kChannels[0]));
  EXPECT_NE(first, second);
  Engine engine(SmallModel());
  EXPECT_EQ(LoadEngineState(engine, dir_).loaded(), 2U);
  EXPECT_EQ(engine.channel_status(*engine.FindChannel(kChannels[0])).samples, 700);
}

// A checkpoint of many files renames each whole file into place and syncs the folder
// once: every file loads, no temp file is left, and a nested folder is created.
TEST_F(StateDirectoryTest, CheckpointLeavesWholeFilesAndNoTempFiles) {
  const std::string nested = dir_ + "/a/b";
  Engine engine(SmallModel());
  Feed(engine, 400);
  ASSERT_TRUE(SaveEngineState(engine, nested).ok());
  std::vector<std::string> names;
  for (const auto& entry : fs::directory_iterator(nested)) {
    names.push_back(entry.path().filename().string());
  }
  std::sort(names.begin(), names.end());
  EXPECT_EQ(names,
            (std::vector<std::string>{StateFileName(kChannels[0]), StateFileName(kChannels[1])}));
  Engine loaded(SmallModel());
  EXPECT_EQ(LoadEngineState(loaded, nested).loaded(), 2U);
}

TEST_F(StateDirectoryTest, FailedWritesNameTheirPathAndLeaveNothing) {
  const std::vector<std::uint8_t> bytes = {1, 2, 3};
  // The unsynced write does not create folders: the caller made it (CreateStateDirectory).
  const core::Status unsynced = WriteStateFileUnsynced(dir_ + "/nope", kChannels[0], bytes);
  EXPECT_FALSE(unsynced.ok());
  EXPECT_NE(unsynced.message().find(StateFileName(kChannels[0]) + ".tmp"), std::string::npos)
      << unsynced.message();
  EXPECT_FALSE(fs::exists(dir_ + "/nope"));
  // A folder below a regular file cannot be created.
  fs::create_directories(dir_);
  Write(dir_ + "/plain", bytes);
  const core::Status created = CreateStateDirectory(dir_ + "/plain/sub");
  EXPECT_EQ(created.code(), core::StatusCode::kUnavailable);
  EXPECT_NE(created.message().find("plain/sub"), std::string::npos) << created.message();
  Engine engine(SmallModel());
  Feed(engine, 10);
  EXPECT_FALSE(SaveEngineState(engine, dir_ + "/plain/sub").ok());
  EXPECT_FALSE(SyncStateDirectory(dir_ + "/plain/sub").ok());
}

}  // namespace
}  // namespace nightjar::state
