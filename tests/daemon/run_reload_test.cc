// SIGHUP reload edge cases of `nightjar run`, end to end: the real binary against a real
// mosquitto on a free loopback port, fed by mosquitto_pub and watched by mosquitto_sub
// (daemon_fixture.h). A reload that adds a subscription starts ingesting its topic and one
// that drops a subscription stops it; a key that needs a restart is named in one warning
// and in the status; a reload that resets a channel in alarm publishes a clear first, and
// that clear passes config/alert.schema.json (python3-jsonschema as the outside check).
//
// The step is +10 m3/h on N(0, 0.5) noise (20 sigma) on a last-value forecaster: far
// beyond every chart limit, so the alarm is up while the step lasts (common practice).
#include <gtest/gtest.h>

#include <nlohmann/json.hpp>
#include <string>
#include <vector>

#include "daemon_fixture.h"

namespace nightjar::testing {
namespace {

using Json = nlohmann::json;

const std::string kFlowTopic = "brackwater/cw2/pump_a/flow";
const std::string kFlowState = std::string(kStatePrefix) + "/cw2/pump_a/flow";
// A second plant area whose samples come on other topics than brackwater/...
const std::string kPlant2Topic = "annexe/skid3/flow";
const std::string kPlant2State = std::string(kStatePrefix) + "/annexe/skid3/flow";
const std::string kPlant2Subscription =
    "    - topic: \"annexe/{asset}/{signal}\"\n"
    "      channel: \"annexe.{asset}.{signal}\"\n"
    "      payload: json\n"
    "      time_field: t\n"
    "      time_unit: epoch_s\n";
const std::string kCw2Subscription =
    "    - topic: \"brackwater/{area}/{asset}/{signal}\"\n"
    "      channel: \"{area}.{asset}.{signal}\"\n"
    "      payload: json\n"
    "      time_field: t\n"
    "      time_unit: epoch_s\n";

// TestConfig() with its subscription list replaced by `subscriptions`.
std::string WithSubscriptions(std::string config, const std::string& subscriptions) {
  const std::size_t at = config.find(kCw2Subscription);
  EXPECT_NE(at, std::string::npos);
  if (at != std::string::npos) config.replace(at, kCw2Subscription.size(), subscriptions);
  return config;
}

std::unique_ptr<TestBroker> StartBroker() {
  core::Result<std::unique_ptr<TestBroker>> broker = TestBroker::Start();
  EXPECT_TRUE(broker.ok()) << broker.status().message();
  return broker.ok() ? std::move(broker).value() : nullptr;
}

std::unique_ptr<Witness> Watch(const TestBroker& broker, const std::string& filter,
                               const std::vector<std::string>& more = {}) {
  std::vector<std::string> extra;
  for (const std::string& topic : more) {
    extra.push_back("-t");
    extra.push_back(topic);
  }
  core::Result<std::unique_ptr<Witness>> w = Witness::Start(broker, filter, 100000, extra);
  EXPECT_TRUE(w.ok()) << w.status().message();
  if (!w.ok()) return nullptr;
  EXPECT_TRUE((*w)->WaitSubscribed());
  return std::move(w).value();
}

std::vector<Json> JsonUnder(const Witness& w, const std::string& prefix) {
  std::vector<Json> out;
  for (const auto& [topic, payload] : MessagesUnder(w, prefix)) {
    Json j = Json::parse(payload, nullptr, false);
    if (j.is_object()) out.push_back(j);
  }
  return out;
}

Json LastStatus(const Witness& w) {
  const std::vector<Json> all = JsonUnder(w, kStatusTopic);
  return all.empty() ? Json() : all.back();
}

void StopCleanly(DaemonProcess& daemon) {
  daemon.process().Signal(SIGTERM);
  ASSERT_TRUE(daemon.process().WaitExit(milliseconds(5000))) << "no exit within 5 s after SIGTERM";
  EXPECT_EQ(daemon.process().exit_code(), 0) << daemon.log();
}

TEST(RunReloadTest, ANewSubscriptionIsIngestedAtOnceAndADroppedOneIsNot) {
  auto broker = StartBroker();
  ASSERT_TRUE(broker);
  auto witness = Watch(*broker, std::string(kStatePrefix) + "/#", {kStatusTopic});
  ASSERT_TRUE(witness);
  auto started = DaemonProcess::Start(*broker, TestConfig());
  ASSERT_TRUE(started.ok()) << started.status().message();
  DaemonProcess& daemon = **started;
  const auto plant2_states = [&] { return MessagesUnder(*witness, kPlant2State).size(); };

  // Not subscribed yet: nothing of the annexe reaches the daemon.
  ASSERT_TRUE(PublishLines(*broker, kFlowTopic, FlowLines(0, 20)).ok());
  ASSERT_TRUE(PublishLines(*broker, kPlant2Topic, FlowLines(0, 20)).ok());
  ASSERT_TRUE(
      WaitFor([&] { return !MessagesUnder(*witness, kFlowState).empty(); }, milliseconds(10000)))
      << daemon.log();
  EXPECT_EQ(plant2_states(), 0u);

  // Reload with the annexe added (and a keepalive change, which needs a restart).
  std::string two = WithSubscriptions(TestConfig(), kCw2Subscription + kPlant2Subscription);
  const std::string keepalive = "  keepalive_s: 5\n";
  ASSERT_NE(two.find(keepalive), std::string::npos);
  two.replace(two.find(keepalive), keepalive.size(), "  keepalive_s: 7\n");
  WriteFile(daemon.config_path(), two);
  daemon.process().Signal(SIGHUP);
  ASSERT_TRUE(daemon.WaitLog("reload: subscribed to annexe/+/+")) << daemon.log();
  ASSERT_TRUE(daemon.WaitLog("reloaded")) << daemon.log();
  EXPECT_EQ(daemon.CountInLog("these keys apply at the next start only: mqtt.keepalive_s\n"), 1)
      << daemon.log();
  // The broker takes the SUBSCRIBE a moment after it is sent: publish until it arrives.
  int next = 20;
  ASSERT_TRUE(WaitFor(
      [&] {
        EXPECT_TRUE(PublishLines(*broker, kPlant2Topic, FlowLines(next, next + 1)).ok());
        ++next;
        return WaitFor([&] { return plant2_states() > 0; }, milliseconds(500));
      },
      milliseconds(15000)))
      << daemon.log();
  Json status;
  ASSERT_TRUE(WaitFor(
      [&] {
        status = LastStatus(*witness);
        return status.is_object() && status.value("reloads", 0) == 1 &&
               status.value("channels", 0) == 2;
      },
      milliseconds(10000)))
      << status.dump();
  ASSERT_TRUE(status.contains("restart_pending")) << status.dump();
  EXPECT_EQ(status["restart_pending"], Json::array({"mqtt.keepalive_s"}));

  // Reload with only the annexe: brackwater/... is unsubscribed. Samples published on it
  // before an annexe sample are not counted when that one is.
  WriteFile(daemon.config_path(), WithSubscriptions(TestConfig(), kPlant2Subscription));
  daemon.process().Signal(SIGHUP);
  ASSERT_TRUE(daemon.WaitLog("reload: unsubscribed from brackwater/+/+/+")) << daemon.log();
  ASSERT_TRUE(WaitFor([&] { return daemon.CountInLog("reloaded") == 2; }, milliseconds(10000)));
  ASSERT_TRUE(WaitFor([&] {
    status = LastStatus(*witness);
    return status.is_object() && status.value("reloads", 0) == 2;
  }));
  EXPECT_FALSE(status.contains("restart_pending")) << "keepalive_s is back to the start value";
  const std::uint64_t samples_before = status.value("samples", 0u);
  ASSERT_TRUE(PublishLines(*broker, kFlowTopic, FlowLines(20, 40)).ok());
  ASSERT_TRUE(PublishLines(*broker, kPlant2Topic, FlowLines(next, next + 1)).ok());
  ASSERT_TRUE(WaitFor(
      [&] {
        status = LastStatus(*witness);
        return status.value("samples", 0u) > samples_before;
      },
      milliseconds(10000)))
      << status.dump();
  EXPECT_EQ(status.value("samples", 0u), samples_before + 1) << status.dump();
  EXPECT_EQ(status.value("unmapped", 1u), 0u);

  StopCleanly(daemon);
}

TEST(RunReloadTest, AReloadResettingAChannelInAlarmPublishesAClearFirst) {
  auto broker = StartBroker();
  ASSERT_TRUE(broker);
  auto witness = Watch(*broker, std::string(kAlertPrefix) + "/#");
  ASSERT_TRUE(witness);
  auto started = DaemonProcess::Start(*broker, TestConfig());
  ASSERT_TRUE(started.ok()) << started.status().message();
  DaemonProcess& daemon = **started;

  // Warm-up (200 samples), then the step at 400: raised after the 15 s on-delay, and still
  // up at sample 430.
  ASSERT_TRUE(PublishLines(*broker, kFlowTopic, FlowLines(0, 430, 10.0, 400, 1000)).ok());
  ASSERT_TRUE(
      WaitFor([&] { return JsonUnder(*witness, kAlertPrefix).size() == 1; }, milliseconds(10000)))
      << daemon.log();
  ASSERT_EQ(JsonUnder(*witness, kAlertPrefix)[0]["phase"], "raise");

  // New options for pump A: it is reset, and its raise must not be left standing.
  WriteFile(daemon.config_path(),
            TestConfig("", "  - match: \"cw2.pump_a.*\"\n    anomaly_priority: high\n"));
  daemon.process().Signal(SIGHUP);
  ASSERT_TRUE(
      WaitFor([&] { return JsonUnder(*witness, kAlertPrefix).size() >= 2; }, milliseconds(10000)))
      << daemon.log();
  const std::vector<Json> alerts = JsonUnder(*witness, kAlertPrefix);
  ASSERT_EQ(alerts.size(), 2u);
  const Json& clear = alerts[1];
  EXPECT_EQ(clear["phase"], "clear");
  EXPECT_EQ(clear["kind"], "anomaly");
  EXPECT_EQ(clear["channel"], "cw2.pump_a.flow");
  EXPECT_EQ(clear["priority"], "medium") << "the priority it was raised at";
  EXPECT_NE(clear["message"].get<std::string>().find("reset by a config reload"), std::string::npos)
      << clear.dump();
  EXPECT_GE(clear["ts"].get<std::string>(), alerts[0]["ts"].get<std::string>());
  std::string retained;
  EXPECT_TRUE(WaitRetained(
      *broker, kFlowState,
      [](const std::string& text) {
        return text.find("\"state\":\"learning\"") != std::string::npos;
      },
      milliseconds(10000), &retained))
      << retained;

  std::string lines;
  for (const Json& a : alerts) lines += a.dump() + "\n";
  const std::string file = broker->dir().File("reload-alerts.jsonl");
  WriteFile(file, lines);
  const core::Status valid = RunCommand(
      {"/usr/bin/python3", std::string(NIGHTJAR_SOURCE_DIR) + "/tests/daemon/check_json_schema.py",
       std::string(NIGHTJAR_SOURCE_DIR) + "/config/alert.schema.json", file},
      broker->dir().File("reload-schema.out"));
  EXPECT_TRUE(valid.ok()) << valid.message();
  StopCleanly(daemon);
}

}  // namespace
}  // namespace nightjar::testing
