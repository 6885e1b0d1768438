// Checkpoints of `nightjar run` in-process over FakeBus (tests/fakes/fake_bus.h): every
// channel written to daemon.state_dir on stop and every checkpoint_interval_s, loaded at
// the next start so a restarted channel is armed at its first sample and continues its
// sample count; a damaged file means only that channel starts learning again; a channel
// reset by a reload is written fresh. The real daemon is covered by tests/daemon/.
// The warm-up length (200 samples, last-value forecaster) decides learning vs armed: a
// channel with 1 sample cannot be armed unless its state was loaded (common practice:
// the engine arms only after warmup_samples, engine_options.h).
#include <gtest/gtest.h>
#include <sys/stat.h>

#include <chrono>
#include <filesystem>
#include <fstream>
#include <map>
#include <nlohmann/json.hpp>
#include <string>
#include <thread>
#include <vector>

#include "config/config.h"
#include "core/engine.h"
#include "fakes/fake_bus.h"
#include "mqtt/broker_fixture.h"
#include "service/runtime.h"
#include "service/service_options.h"
#include "state/state_directory.h"

namespace nightjar::service {
namespace {

using Json = nlohmann::json;

template <typename Condition>
bool WaitFor(Condition condition, std::chrono::milliseconds timeout) {
  const auto deadline = std::chrono::steady_clock::now() + timeout;
  while (!condition()) {
    if (std::chrono::steady_clock::now() >= deadline) return condition();
    std::this_thread::sleep_for(std::chrono::milliseconds(2));
  }
  return true;
}

std::string Config(const std::string& state_dir, double interval_s = 300.0, int warmup = 200) {
  return std::string("defaults:\n  forecaster: last_value\n  warmup_samples: ") +
         std::to_string(warmup) +
         "\n  sample_period_s: 1\n  scaler: { warmup_samples: 20 }\n"
         "  sensor: { flatline_samples: 0, gap_periods: 100000 }\n"
         "mqtt:\n  alert_prefix: cw2/alert\n  state_prefix: cw2/state\n"
         "  status_topic: cw2/status\n  command_topic: cw2/command\n  reply_topic: cw2/reply\n"
         "  subscriptions:\n    - topic: \"{area}/{asset}/{signal}\"\n"
         "      channel: \"{area}.{asset}.{signal}\"\n      payload: json\n"
         "      time_field: t\n      time_unit: epoch_s\n"
         "daemon:\n  workers: 3\n  publish_interval_s: 0.1\n  state_dir: \"" +
         state_dir + "\"\n  checkpoint_interval_s: " + std::to_string(interval_s) + "\n";
}

std::shared_ptr<const config::LoadedConfig> Load(const std::string& text) {
  config::LoadResult r = config::LoadConfigString(text, "test.yaml");
  EXPECT_TRUE(r.ok()) << (r.errors.empty() ? "" : r.errors[0].ToString());
  return r.ok() ? std::make_shared<const config::LoadedConfig>(*r.config) : nullptr;
}

core::TimestampUs Now() {
  return std::chrono::duration_cast<std::chrono::microseconds>(
             std::chrono::system_clock::now().time_since_epoch())
      .count();
}

std::string Sample(int i) {
  // A small deterministic wiggle: the scaler needs a spread.
  const double value = 50.0 + 0.5 * static_cast<double>((i * 7) % 11 - 5) / 5.0;
  return "{\"t\":" + std::to_string(1'780'000'000 + i) + ",\"value\":" + std::to_string(value) +
         "}";
}

const char* const kTopics[] = {"cw2/pump_a/flow", "cw2/pump_b/flow", "cw2/tank/level"};
const char* const kChannels[] = {"cw2.pump_a.flow", "cw2.pump_b.flow", "cw2.tank.level"};

struct Daemon {
  testing::FakeBus bus;
  std::unique_ptr<Runtime> runtime;
};

std::unique_ptr<Daemon> StartDaemon(const std::shared_ptr<const config::LoadedConfig>& config,
                                    const std::string& state_in = "") {
  auto d = std::make_unique<Daemon>();
  core::Result<ServiceOptions> options = BuildServiceOptions(*config, "test.yaml", std::nullopt);
  EXPECT_TRUE(options.ok()) << options.status().message();
  if (!options.ok()) return nullptr;
  options->state_in = state_in;
  auto runtime = Runtime::Create(*options, config, d->bus, Now);
  EXPECT_TRUE(runtime.ok()) << runtime.status().message();
  if (!runtime.ok()) return nullptr;
  d->runtime = std::move(runtime).value();
  EXPECT_TRUE(d->runtime->Start().ok());
  return d;
}

void Feed(Daemon& d, int from, int to) {
  for (int i = from; i < to; ++i) {
    for (const char* topic : kTopics) ASSERT_TRUE(d.bus.Deliver(topic, Sample(i)));
  }
}

// The first retained state message per channel topic.
std::map<std::string, Json> FirstStates(const testing::FakeBus& bus) {
  std::map<std::string, Json> first;
  for (const auto& m : bus.published()) {
    if (m.topic.rfind("cw2/state/", 0) == 0 && first.count(m.topic) == 0) {
      first[m.topic] = Json::parse(m.payload);
    }
  }
  return first;
}

std::string FileOf(const std::string& dir, const std::string& channel) {
  return dir + "/" + state::StateFileName(channel);
}

TEST(RuntimeStateTest, StopCheckpointsEveryChannelAndARestartIsArmedAtItsFirstSample) {
  testing::TempDir dir;
  const std::string state_dir = dir.File("state");
  const auto config = Load(Config(state_dir));
  ASSERT_TRUE(config);
  {
    auto d = StartDaemon(config);
    ASSERT_TRUE(d);
    Feed(*d, 0, 300);
    ASSERT_TRUE(
        WaitFor([&] { return d->runtime->counters().samples == 900; }, std::chrono::seconds(20)));
    for (const char* channel : kChannels) {
      EXPECT_FALSE(std::filesystem::exists(FileOf(state_dir, channel))) << "before the stop";
    }
    d->runtime->Stop();
  }
  for (const char* channel : kChannels) {
    EXPECT_TRUE(std::filesystem::exists(FileOf(state_dir, channel))) << channel;
  }

  auto d = StartDaemon(config);
  ASSERT_TRUE(d);
  // Loaded channels say nothing until their first sample (no state with no time).
  EXPECT_TRUE(FirstStates(d->bus).empty());
  Feed(*d, 300, 301);
  ASSERT_TRUE(
      WaitFor([&] { return d->runtime->counters().samples == 3; }, std::chrono::seconds(20)));
  ASSERT_TRUE(WaitFor([&] { return FirstStates(d->bus).size() == 3; }, std::chrono::seconds(20)));
  d->runtime->Stop();
  for (const auto& [topic, state] : FirstStates(d->bus)) {
    EXPECT_EQ(state["state"], "armed") << topic << " " << state.dump();
    EXPECT_EQ(state["samples"], 301) << topic << ": the sample count goes on from the file";
  }
  EXPECT_EQ(d->runtime->counters().channels, 3);
}

// A checkpoint writes only the channels that changed since their last one: after a
// restart from the same folder, a stop rewrites the one channel that had a sample and
// leaves the other files alone (each write is temp file + rename, so a rewritten file has
// a new inode).
TEST(RuntimeStateTest, AStopRewritesOnlyTheChannelsThatChanged) {
  testing::TempDir dir;
  const std::string state_dir = dir.File("state");
  const auto config = Load(Config(state_dir));
  ASSERT_TRUE(config);
  {
    auto d = StartDaemon(config);
    ASSERT_TRUE(d);
    Feed(*d, 0, 300);
    ASSERT_TRUE(
        WaitFor([&] { return d->runtime->counters().samples == 900; }, std::chrono::seconds(20)));
    d->runtime->Stop();
  }
  const auto inode = [&](const char* channel) -> ino_t {
    struct stat st {};
    return ::stat(FileOf(state_dir, channel).c_str(), &st) == 0 ? st.st_ino : 0;
  };
  std::vector<ino_t> before;
  for (const char* channel : kChannels) {
    before.push_back(inode(channel));
    ASSERT_NE(before.back(), 0u) << channel;
  }

  auto d = StartDaemon(config);
  ASSERT_TRUE(d);
  ASSERT_TRUE(d->bus.Deliver(kTopics[0], Sample(300)));
  ASSERT_TRUE(
      WaitFor([&] { return d->runtime->counters().samples == 1; }, std::chrono::seconds(20)));
  d->runtime->Stop();
  EXPECT_NE(inode(kChannels[0]), before[0]) << "the channel with a sample is written";
  EXPECT_EQ(inode(kChannels[1]), before[1]) << "unchanged since it was loaded";
  EXPECT_EQ(inode(kChannels[2]), before[2]) << "unchanged since it was loaded";
  core::Engine engine(config->engine, config->Resolver());
  const state::LoadReport report = state::LoadEngineState(engine, state_dir);
  EXPECT_EQ(report.loaded(), 3u);
  EXPECT_EQ(engine.channel_status(*engine.FindChannel(kChannels[0])).samples, 301);
  EXPECT_EQ(engine.channel_status(*engine.FindChannel(kChannels[1])).samples, 300);
}

TEST(RuntimeStateTest, CheckpointsOnTheIntervalWhileRunning) {
  testing::TempDir dir;
  const std::string state_dir = dir.File("state");
  const auto config = Load(Config(state_dir, 0.2));
  ASSERT_TRUE(config);
  auto d = StartDaemon(config);
  ASSERT_TRUE(d);
  Feed(*d, 0, 250);
  ASSERT_TRUE(
      WaitFor([&] { return d->runtime->counters().samples == 750; }, std::chrono::seconds(20)));
  // Tick() is what `nightjar run` calls every 100 ms; it queues the checkpoints.
  const bool written = WaitFor(
      [&] {
        d->runtime->Tick();
        for (const char* channel : kChannels) {
          if (!std::filesystem::exists(FileOf(state_dir, channel))) return false;
        }
        return true;
      },
      std::chrono::seconds(20));
  ASSERT_TRUE(written);
  // Read back while the daemon still runs: every file is whole (written by rename) and
  // holds an armed channel with the samples up to the checkpoint.
  core::EngineOptions engine_options = config->engine;
  core::Engine engine(engine_options, config->Resolver());
  const state::LoadReport report = state::LoadEngineState(engine, state_dir);
  EXPECT_EQ(report.loaded(), 3u);
  EXPECT_EQ(report.problems(), 0u);
  for (const char* channel : kChannels) {
    const std::optional<core::ChannelId> id = engine.FindChannel(channel);
    ASSERT_TRUE(id) << channel;
    EXPECT_EQ(engine.channel_status(*id).state, core::ChannelState::kArmed) << channel;
  }
  d->runtime->Stop();
}

TEST(RuntimeStateTest, ADamagedFileRestartsOnlyItsChannel) {
  testing::TempDir dir;
  const std::string state_dir = dir.File("state");
  const auto config = Load(Config(state_dir));
  ASSERT_TRUE(config);
  {
    auto d = StartDaemon(config);
    ASSERT_TRUE(d);
    Feed(*d, 0, 300);
    ASSERT_TRUE(
        WaitFor([&] { return d->runtime->counters().samples == 900; }, std::chrono::seconds(20)));
    d->runtime->Stop();
  }
  // One byte flipped in the middle of pump_b's file: the CRC no longer matches.
  const std::string damaged = FileOf(state_dir, "cw2.pump_b.flow");
  {
    std::fstream f(damaged, std::ios::in | std::ios::out | std::ios::binary);
    ASSERT_TRUE(f.is_open());
    f.seekg(0, std::ios::end);
    const std::streamoff size = f.tellg();
    ASSERT_GT(size, 100);
    f.seekg(size / 2);
    char c = 0;
    f.get(c);
    f.seekp(size / 2);
    f.put(static_cast<char>(c ^ 0x5A));
  }
  auto d = StartDaemon(config);
  ASSERT_TRUE(d);
  Feed(*d, 300, 301);
  ASSERT_TRUE(WaitFor([&] { return FirstStates(d->bus).size() == 3; }, std::chrono::seconds(20)));
  d->runtime->Stop();
  const auto first = FirstStates(d->bus);
  EXPECT_EQ(first.at("cw2/state/cw2/pump_a/flow")["state"], "armed");
  EXPECT_EQ(first.at("cw2/state/cw2/tank/level")["state"], "armed");
  EXPECT_EQ(first.at("cw2/state/cw2/pump_b/flow")["state"], "learning");
  EXPECT_EQ(first.at("cw2/state/cw2/pump_b/flow")["samples"], 1);
}

TEST(RuntimeStateTest, StateInLoadsFromThereAndCheckpointsGoToStateDir) {
  testing::TempDir dir;
  const std::string learnt = dir.File("learnt");
  const std::string state_dir = dir.File("state");
  {
    auto d = StartDaemon(Load(Config(learnt)));
    ASSERT_TRUE(d);
    Feed(*d, 0, 300);
    ASSERT_TRUE(
        WaitFor([&] { return d->runtime->counters().samples == 900; }, std::chrono::seconds(20)));
    d->runtime->Stop();
  }
  const auto config = Load(Config(state_dir));
  ASSERT_TRUE(config);
  auto d = StartDaemon(config, learnt);
  ASSERT_TRUE(d);
  Feed(*d, 300, 301);
  ASSERT_TRUE(WaitFor([&] { return FirstStates(d->bus).size() == 3; }, std::chrono::seconds(20)));
  d->runtime->Stop();
  for (const auto& [topic, state] : FirstStates(d->bus)) {
    EXPECT_EQ(state["state"], "armed") << topic;
  }
  for (const char* channel : kChannels) {
    EXPECT_TRUE(std::filesystem::exists(FileOf(state_dir, channel))) << channel;
  }
}

// A file put into the folder after the start (e.g. copied from a `learn` run) is loaded
// when its channel sends its first sample. One worker, so that the sample of another
// channel proves the start-up load is over before the file appears.
TEST(RuntimeStateTest, AFileThatAppearsAfterTheStartIsLoadedAtItsChannelsFirstSample) {
  testing::TempDir dir;
  const std::string learnt = dir.File("learnt");
  const std::string state_dir = dir.File("state");
  {
    auto d = StartDaemon(Load(Config(learnt)));
    ASSERT_TRUE(d);
    Feed(*d, 0, 300);
    ASSERT_TRUE(
        WaitFor([&] { return d->runtime->counters().samples == 900; }, std::chrono::seconds(20)));
    d->runtime->Stop();
  }
  std::string text = Config(state_dir);
  text.replace(text.find("workers: 3"), std::string("workers: 3").size(), "workers: 1");
  auto d = StartDaemon(Load(text));
  ASSERT_TRUE(d);
  ASSERT_TRUE(d->bus.Deliver("cw2/pump_b/flow", Sample(300)));
  ASSERT_TRUE(
      WaitFor([&] { return d->runtime->counters().samples == 1; }, std::chrono::seconds(20)));
  std::filesystem::create_directories(state_dir);
  std::filesystem::copy_file(FileOf(learnt, "cw2.pump_a.flow"),
                             FileOf(state_dir, "cw2.pump_a.flow"));
  ASSERT_TRUE(d->bus.Deliver("cw2/pump_a/flow", Sample(300)));
  ASSERT_TRUE(WaitFor([&] { return FirstStates(d->bus).size() == 2; }, std::chrono::seconds(20)));
  d->runtime->Stop();
  const auto first = FirstStates(d->bus);
  EXPECT_EQ(first.at("cw2/state/cw2/pump_b/flow")["state"], "learning");
  EXPECT_EQ(first.at("cw2/state/cw2/pump_a/flow")["state"], "armed");
  EXPECT_EQ(first.at("cw2/state/cw2/pump_a/flow")["samples"], 301);
}

TEST(RuntimeStateTest, AChannelResetByAReloadIsCheckpointedFresh) {
  testing::TempDir dir;
  const std::string state_dir = dir.File("state");
  auto d = StartDaemon(Load(Config(state_dir)));
  ASSERT_TRUE(d);
  Feed(*d, 0, 300);
  ASSERT_TRUE(
      WaitFor([&] { return d->runtime->counters().samples == 900; }, std::chrono::seconds(20)));
  // A longer warm-up for every channel: all of them learn again.
  const auto changed = Load(Config(state_dir, 300.0, 400));
  ASSERT_TRUE(changed);
  const core::Result<ServiceOptions> next =
      BuildServiceOptions(*changed, "test.yaml", std::nullopt);
  ASSERT_TRUE(next.ok()) << next.status().message();
  d->runtime->Reload(changed, *next);
  Feed(*d, 300, 310);
  ASSERT_TRUE(
      WaitFor([&] { return d->runtime->counters().samples == 930; }, std::chrono::seconds(20)));
  d->runtime->Stop();
  core::Engine engine(changed->engine, changed->Resolver());
  const state::LoadReport report = state::LoadEngineState(engine, state_dir);
  EXPECT_EQ(report.loaded(), 3u);
  for (const char* channel : kChannels) {
    const std::optional<core::ChannelId> id = engine.FindChannel(channel);
    ASSERT_TRUE(id) << channel;
    EXPECT_EQ(engine.channel_status(*id).state, core::ChannelState::kLearning) << channel;
    EXPECT_EQ(engine.channel_status(*id).samples, 10) << channel;
  }
}

}  // namespace
}  // namespace nightjar::service
