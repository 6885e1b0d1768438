// `nightjar run` keeps what it learnt across restarts, end to end: the real binary against
// a real mosquitto on a free loopback port (daemon_fixture.h), samples from mosquitto_pub
// and the retained state read by a late mosquitto_sub as the outside check.
//
// A channel is "armed" only after warmup_samples (200 here) samples, so a restarted
// channel that reads armed at its first sample, with its sample count going on, must have
// been loaded from its checkpoint (common practice: the engine's warm-up rule,
// engine_options.h). Checkpoint files: lib/state/FORMAT.md.
#include <gtest/gtest.h>

#include <csignal>
#include <filesystem>
#include <fstream>
#include <nlohmann/json.hpp>
#include <sstream>
#include <string>

#include "daemon_fixture.h"

namespace nightjar::testing {
namespace {

using Json = nlohmann::json;

const std::string kFlowTopic = "brackwater/cw2/pump_a/flow";
const std::string kFlowState = std::string(kStatePrefix) + "/cw2/pump_a/flow";
const std::string kFlowFile = "cw2.pump_a.flow.njstate";

std::unique_ptr<TestBroker> StartBroker() {
  core::Result<std::unique_ptr<TestBroker>> broker = TestBroker::Start();
  EXPECT_TRUE(broker.ok()) << broker.status().message();
  return broker.ok() ? std::move(broker).value() : nullptr;
}

// Waits until the retained state of pump_a says `samples` samples, then returns it.
Json StateWithSamples(const TestBroker& broker, int samples) {
  Json state;
  WaitRetained(broker, kFlowState, [&](const std::string& text) {
    if (text.rfind("1 ", 0) != 0) return false;
    state = Json::parse(text.substr(2), nullptr, false);
    return state.is_object() && state.value("samples", -1) == samples;
  });
  return state;
}

void StopCleanly(DaemonProcess& daemon) {
  daemon.process().Signal(SIGTERM);
  ASSERT_TRUE(daemon.process().WaitExit(milliseconds(10000))) << "no exit within 10 s";
  EXPECT_EQ(daemon.process().exit_code(), 0) << daemon.log();
}

TEST(RunStateTest, ARestartIsArmedAtOnceAndADamagedFileRestartsTheChannelLearning) {
  auto broker = StartBroker();
  ASSERT_TRUE(broker);
  const std::string state_dir = broker->dir().File("state");
  const std::string config = TestConfig("", "", state_dir);
  {
    auto started = DaemonProcess::Start(*broker, config, {}, "first");
    ASSERT_TRUE(started.ok()) << started.status().message();
    DaemonProcess& daemon = **started;
    ASSERT_TRUE(PublishLines(*broker, kFlowTopic, FlowLines(0, 300)).ok());
    const Json warm = StateWithSamples(*broker, 300);
    ASSERT_EQ(warm.value("state", ""), "armed") << warm.dump() << daemon.log();
    StopCleanly(daemon);
    EXPECT_GE(daemon.CountInLog("checkpoint (stop): 1 channel written to " + state_dir), 1)
        << daemon.log();
  }
  ASSERT_TRUE(std::filesystem::exists(state_dir + "/" + kFlowFile));

  {
    auto started = DaemonProcess::Start(*broker, config, {}, "second");
    ASSERT_TRUE(started.ok()) << started.status().message();
    DaemonProcess& daemon = **started;
    EXPECT_TRUE(daemon.WaitLog(state_dir + "/" + kFlowFile + ": loaded")) << daemon.log();
    ASSERT_TRUE(PublishLines(*broker, kFlowTopic, FlowLines(300, 301)).ok());
    const Json state = StateWithSamples(*broker, 301);
    EXPECT_EQ(state.value("state", ""), "armed") << state.dump() << daemon.log();
    StopCleanly(daemon);
  }

  // One byte flipped in the middle of the file: its CRC-32 no longer matches.
  const std::string file = state_dir + "/" + kFlowFile;
  {
    std::fstream f(file, std::ios::in | std::ios::out | std::ios::binary);
    ASSERT_TRUE(f.is_open());
    f.seekg(0, std::ios::end);
    const std::streamoff size = f.tellg();
    f.seekg(size / 2);
    char c = 0;
    f.get(c);
    f.seekp(size / 2);
    f.put(static_cast<char>(c ^ 0x5A));
  }
  auto started = DaemonProcess::Start(*broker, config, {}, "third");
  ASSERT_TRUE(started.ok()) << started.status().message();
  DaemonProcess& daemon = **started;
  EXPECT_TRUE(daemon.WaitLog(file + ": corrupt")) << daemon.log();
  EXPECT_GE(daemon.CountInLog("the channel starts fresh"), 1) << daemon.log();
  ASSERT_TRUE(PublishLines(*broker, kFlowTopic, FlowLines(301, 302)).ok());
  const Json fresh = StateWithSamples(*broker, 1);
  EXPECT_EQ(fresh.value("state", ""), "learning") << fresh.dump() << daemon.log();
  StopCleanly(daemon);
  // The stop wrote a good checkpoint over the damaged one.
  EXPECT_GE(daemon.CountInLog("checkpoint (stop): 1 channel written"), 1) << daemon.log();
}

// A CSV recording in the `nightjar learn` input format, timestamps ending one second
// before the daemon's first sample (kT0), values like FlowLines.
std::string LearnRecording(int rows) {
  std::ostringstream out;
  out << "timestamp,cw2.pump_a.flow\n";
  const std::string flow = FlowLines(0, rows);
  std::istringstream lines(flow);
  std::string line;
  for (int i = 0; std::getline(lines, line); ++i) {
    const Json j = Json::parse(line);
    const std::time_t t = static_cast<std::time_t>(kT0 - rows + i);
    std::tm tm{};
    gmtime_r(&t, &tm);
    char stamp[32];
    std::strftime(stamp, sizeof stamp, "%Y-%m-%dT%H:%M:%SZ", &tm);
    out << stamp << "," << j["value"].get<double>() << "\n";
  }
  return out.str();
}

TEST(RunStateTest, StateInFromALearnRunStartsArmed) {
  auto broker = StartBroker();
  ASSERT_TRUE(broker);
  const std::string learnt = broker->dir().File("learnt");
  const std::string state_dir = broker->dir().File("state");
  const std::string config = TestConfig("", "", state_dir);
  WriteFile(broker->dir().File("learn.yaml"), config);
  WriteFile(broker->dir().File("good.csv"), LearnRecording(300));
  const core::Status learned =
      RunCommand({NIGHTJAR_BINARY, "learn", "--input", broker->dir().File("good.csv"), "--config",
                  broker->dir().File("learn.yaml"), "--state-out", learnt},
                 broker->dir().File("learn.out"), "/dev/null", milliseconds(60000));
  ASSERT_TRUE(learned.ok()) << learned.message() << ReadFile(broker->dir().File("learn.out"));
  ASSERT_TRUE(std::filesystem::exists(learnt + "/" + kFlowFile));

  auto started = DaemonProcess::Start(*broker, config, {"--state-in", learnt});
  ASSERT_TRUE(started.ok()) << started.status().message();
  DaemonProcess& daemon = **started;
  EXPECT_TRUE(daemon.WaitLog(learnt + "/" + kFlowFile + ": loaded")) << daemon.log();
  ASSERT_TRUE(PublishLines(*broker, kFlowTopic, FlowLines(0, 1)).ok());
  const Json state = StateWithSamples(*broker, 301);
  EXPECT_EQ(state.value("state", ""), "armed") << state.dump() << daemon.log();
  StopCleanly(daemon);
  // Checkpoints go to daemon.state_dir, not back into the learnt folder.
  EXPECT_TRUE(std::filesystem::exists(state_dir + "/" + kFlowFile)) << daemon.log();
}

TEST(RunStateTest, StateInThatIsNoFolderExitsOne) {
  auto broker = StartBroker();
  ASSERT_TRUE(broker);
  WriteFile(broker->dir().File("cfg.yaml"), TestConfig());
  const std::string out = broker->dir().File("run.out");
  core::Result<std::unique_ptr<ChildProcess>> child = ChildProcess::Spawn(
      {NIGHTJAR_BINARY, "run", "--config", broker->dir().File("cfg.yaml"), "--broker",
       "127.0.0.1:" + std::to_string(broker->port()), "--state-in", broker->dir().File("nope")},
      out);
  ASSERT_TRUE(child.ok()) << child.status().message();
  ASSERT_TRUE((*child)->WaitExit(milliseconds(10000)));
  EXPECT_EQ((*child)->exit_code(), 1);
  EXPECT_NE(ReadFile(out).find("--state-in " + broker->dir().File("nope")), std::string::npos)
      << ReadFile(out);
}

}  // namespace
}  // namespace nightjar::testing
