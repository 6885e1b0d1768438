// WorkerStateStore::Save (service/worker_state.h): a checkpoint writes the changed channels
// (temp file, fsync, rename each, one folder fsync for all), clears their flags only when
// the whole checkpoint is on disk, and keeps them set when it failed, so the next
// checkpoint tries again. (Behaviour of our own contract; the write-then-rename-then-fsync
// pattern is common practice for crash-safe files on POSIX file systems.)
#include "service/worker_state.h"

#include <gtest/gtest.h>

#include <filesystem>
#include <fstream>
#include <string>
#include <vector>

#include "core/engine.h"
#include "mqtt/broker_fixture.h"
#include "state/state_directory.h"

namespace nightjar::service {
namespace {

constexpr core::TimestampUs kStart = 1'780'000'000LL * core::kMicrosPerSecond;

core::EngineOptions SmallModel() {
  core::EngineOptions options;
  options.defaults.predictor.hidden_size = 8;
  options.defaults.predictor.window = 8;
  return options;
}

void Feed(core::Engine& engine, const std::vector<std::string>& channels) {
  std::vector<core::Alert> alerts;
  for (int i = 0; i < 20; ++i) {
    for (const std::string& channel : channels) {
      engine.Process({channel, kStart + i * core::kMicrosPerSecond, 50.0 + i % 3}, alerts);
    }
  }
}

TEST(WorkerStateStoreTest, CheckpointWritesChangedChannelsAndClearsTheirFlags) {
  const testing::TempDir dir;
  const std::string save_dir = dir.File("state");
  const std::vector<std::string> channels = {"cw2.pump_a.flow", "cw2.pump_b.flow",
                                             "cw2.tank.level"};
  core::Engine engine(SmallModel());
  Feed(engine, channels);
  WorkerStateStore store(0, WorkerStateOptions{"", save_dir, 1, {}});
  std::vector<char> unsaved = {1, 0, 1};
  const CheckpointResult result = store.Save(engine, "test", &unsaved);
  EXPECT_EQ(result.written, 2U);
  EXPECT_EQ(result.unchanged, 1U);
  EXPECT_EQ(result.failed, 0U);
  EXPECT_EQ(unsaved, (std::vector<char>{0, 0, 0}));
  EXPECT_TRUE(std::filesystem::exists(save_dir + "/" + state::StateFileName(channels[0])));
  EXPECT_FALSE(std::filesystem::exists(save_dir + "/" + state::StateFileName(channels[1])));
  core::Engine loaded(SmallModel());
  EXPECT_EQ(state::LoadEngineState(loaded, save_dir).loaded(), 2U);
}

TEST(WorkerStateStoreTest, FailedCheckpointKeepsTheFlagsForTheNextOne) {
  const testing::TempDir dir;
  {
    std::ofstream plain(dir.File("plain"));
    plain << "not a folder";
  }
  const std::vector<std::string> channels = {"cw2.pump_a.flow", "cw2.tank.level"};
  core::Engine engine(SmallModel());
  Feed(engine, channels);
  // A state folder below a regular file cannot be made.
  WorkerStateStore store(0, WorkerStateOptions{"", dir.File("plain/state"), 1, {}});
  std::vector<char> unsaved = {1, 1};
  const CheckpointResult result = store.Save(engine, "test", &unsaved);
  EXPECT_EQ(result.written, 0U);
  EXPECT_EQ(result.failed, 2U);
  EXPECT_EQ(result.bytes, 0U);
  EXPECT_EQ(unsaved, (std::vector<char>{1, 1}));
}

}  // namespace
}  // namespace nightjar::service
