// `nightjar run` end to end: the real binary against a real mosquitto on a free loopback
// port, fed by mosquitto_pub and watched by mosquitto_sub (daemon_fixture.h). Alert
// payloads are validated against config/alert.schema.json with python3-jsonschema
// (Debian's Draft 2020-12 validator) as the outside check of the wire format.
//
// The signal is a steady flow with Gaussian noise and a +10 m3/h (20 sigma) step for 30
// samples: with the last-value forecaster any sound residual chart must raise at the step
// and clear once it is over (common practice: a 20-sigma shift is far beyond every chart
// limit the false-alarm budget gives).
#include <gtest/gtest.h>
#include <sys/socket.h>
#include <sys/un.h>

#include <algorithm>
#include <map>
#include <nlohmann/json.hpp>
#include <string>
#include <vector>

#include "daemon_fixture.h"

namespace nightjar::testing {
namespace {

using Json = nlohmann::json;

const std::string kFlowTopic = "brackwater/cw2/pump_a/flow";
const std::string kFlowAlerts = std::string(kAlertPrefix) + "/cw2/pump_a/flow";
const std::string kFlowState = std::string(kStatePrefix) + "/cw2/pump_a/flow";

std::unique_ptr<TestBroker> StartBroker() {
  core::Result<std::unique_ptr<TestBroker>> broker = TestBroker::Start();
  EXPECT_TRUE(broker.ok()) << broker.status().message();
  return broker.ok() ? std::move(broker).value() : nullptr;
}

std::unique_ptr<Witness> Watch(const TestBroker& broker, const std::vector<std::string>& more) {
  std::vector<std::string> extra;
  for (const std::string& topic : more) {
    extra.push_back("-t");
    extra.push_back(topic);
  }
  core::Result<std::unique_ptr<Witness>> w =
      Witness::Start(broker, std::string(kAlertPrefix) + "/#", 100000, extra);
  EXPECT_TRUE(w.ok()) << w.status().message();
  if (!w.ok()) return nullptr;
  EXPECT_TRUE((*w)->WaitSubscribed());
  return std::move(w).value();
}

std::vector<Json> AlertsOf(const Witness& w) {
  std::vector<Json> out;
  for (const auto& [topic, payload] : MessagesUnder(w, kAlertPrefix)) {
    Json j = Json::parse(payload, nullptr, false);
    j["_topic"] = topic;
    out.push_back(j);
  }
  return out;
}

bool HasStatus(const Witness& w, const std::string& state) {
  for (const auto& [topic, payload] : MessagesUnder(w, kStatusTopic)) {
    const Json j = Json::parse(payload, nullptr, false);
    if (j.is_object() && j.value("state", "") == state) return true;
  }
  return false;
}

Json LastStatus(const Witness& w) {
  Json last;
  for (const auto& [topic, payload] : MessagesUnder(w, kStatusTopic)) {
    last = Json::parse(payload, nullptr, false);
  }
  return last;
}

// Retained state payload (without the retain flag) parsed, or null.
Json StateOf(const TestBroker& broker, const std::string& topic) {
  const std::string text = ReadRetained(broker, topic);
  if (text.rfind("1 ", 0) != 0) return Json();
  return Json::parse(text.substr(2), nullptr, false);
}

bool StateIs(const TestBroker& broker, const std::string& topic, const std::string& state,
             Json* last = nullptr) {
  return WaitFor(
      [&] {
        const Json j = StateOf(broker, topic);
        if (last != nullptr) *last = j;
        return j.is_object() && j.value("state", "") == state;
      },
      milliseconds(10000));
}

void StopCleanly(DaemonProcess& daemon) {
  daemon.process().Signal(SIGTERM);
  ASSERT_TRUE(daemon.process().WaitExit(milliseconds(5000))) << "no exit within 5 s after SIGTERM";
  EXPECT_EQ(daemon.process().exit_code(), 0) << daemon.log();
}

TEST(RunDaemonTest, StepRaisesOnceClearsOnceStateRetainedSigtermGoesOffline) {
  auto broker = StartBroker();
  ASSERT_TRUE(broker);
  auto witness = Watch(*broker, {kStatusTopic, kReplyTopic});
  ASSERT_TRUE(witness);
  auto started = DaemonProcess::Start(*broker, TestConfig());
  ASSERT_TRUE(started.ok()) << started.status().message();
  DaemonProcess& daemon = **started;

  // Warm-up (200 samples learning) and the first 20 samples of the step.
  ASSERT_TRUE(PublishLines(*broker, kFlowTopic, FlowLines(0, 420, 10.0, 400, 430)).ok());
  ASSERT_TRUE(WaitFor([&] { return AlertsOf(*witness).size() >= 1; }, milliseconds(10000)))
      << daemon.log();
  // A subscriber arriving now gets the retained state: in alarm.
  Json state;
  EXPECT_TRUE(StateIs(*broker, kFlowState, "in_alarm", &state)) << state.dump();
  EXPECT_EQ(state.value("channel", ""), "cw2.pump_a.flow");

  // An operator acknowledges it; a malformed command is answered with the field at fault.
  ASSERT_TRUE(
      PublishOne(*broker, kCommandTopic,
                 R"({"action":"acknowledge","channel":"cw2.pump_a.flow","request_id":"a1"})")
          .ok());
  ASSERT_TRUE(PublishOne(*broker, kCommandTopic,
                         R"({"action":"shelve","channel":"cw2.pump_a.flow","request_id":"a2"})")
                  .ok());
  // Replies are matched by request_id: a refused command is answered at once by the
  // network thread, a valid one by the channel's worker, so their order is not fixed.
  const auto reply_to = [&](const std::string& id) {
    for (const auto& [topic, payload] : MessagesUnder(*witness, kReplyTopic)) {
      const Json j = Json::parse(payload, nullptr, false);
      if (j.is_object() && j.value("request_id", "") == id) return j;
    }
    return Json();
  };
  ASSERT_TRUE(WaitFor([&] { return !reply_to("a1").is_null() && !reply_to("a2").is_null(); },
                      milliseconds(10000)))
      << witness->output();
  const Json ack = reply_to("a1");
  EXPECT_EQ(ack["ok"], true) << ack.dump();
  const Json refused = reply_to("a2");
  EXPECT_EQ(refused["ok"], false);
  ASSERT_TRUE(refused["error"].is_string()) << refused.dump();
  EXPECT_NE(refused["error"].get<std::string>().find("duration_s"), std::string::npos);

  // The rest of the step, then steady flow again: the alarm clears.
  ASSERT_TRUE(PublishLines(*broker, kFlowTopic, FlowLines(420, 700, 10.0, 400, 430)).ok());
  EXPECT_TRUE(StateIs(*broker, kFlowState, "armed", &state)) << state.dump() << daemon.log();

  StopCleanly(daemon);
  ASSERT_TRUE(WaitFor([&] { return HasStatus(*witness, "offline"); }, milliseconds(5000)))
      << witness->output();
  const std::string retained = ReadRetained(*broker, kStatusTopic);
  EXPECT_EQ(retained.rfind("1 {\"state\":\"offline\"", 0), 0u) << retained;

  const std::vector<Json> alerts = AlertsOf(*witness);
  ASSERT_EQ(alerts.size(), 2u) << witness->output();
  EXPECT_EQ(alerts[0]["phase"], "raise");
  EXPECT_EQ(alerts[1]["phase"], "clear");
  for (const Json& a : alerts) {
    EXPECT_EQ(a["_topic"], kFlowAlerts);
    EXPECT_EQ(a["channel"], "cw2.pump_a.flow");
    EXPECT_EQ(a["kind"], "anomaly");
    EXPECT_EQ(a["priority"], "medium");
  }
  // Raised within the step (2026-05-28T20:33:20Z is sample 400), cleared after it.
  EXPECT_GE(alerts[0]["ts"].get<std::string>(), "2026-05-28T20:33:20.000Z");
  EXPECT_LT(alerts[0]["ts"].get<std::string>(), "2026-05-28T20:33:50.000Z");
  EXPECT_GE(alerts[1]["ts"].get<std::string>(), "2026-05-28T20:33:50.000Z");
  EXPECT_GT(alerts[0]["value"].get<double>(), 55.0);

  // Every alert payload against the published schema, checked by python3-jsonschema.
  std::string lines;
  for (const auto& [topic, payload] : MessagesUnder(*witness, kAlertPrefix)) {
    lines += payload + "\n";
  }
  const std::string file = broker->dir().File("alerts.jsonl");
  WriteFile(file, lines);
  const core::Status valid = RunCommand(
      {"/usr/bin/python3", std::string(NIGHTJAR_SOURCE_DIR) + "/tests/daemon/check_json_schema.py",
       std::string(NIGHTJAR_SOURCE_DIR) + "/config/alert.schema.json", file},
      broker->dir().File("schema.out"));
  EXPECT_TRUE(valid.ok()) << valid.message();

  const Json last = LastStatus(*witness);
  EXPECT_EQ(last["samples"], 700) << last.dump();
  EXPECT_EQ(last["alerts"], 2);
  EXPECT_EQ(last["dropped"], 0);
  EXPECT_EQ(last["commands"], 2);
}

// One step on two channels of pump cw2.pump_a is one alarm episode: both alarms are
// published, one is annunciated. By name the two channels hash to different workers
// (FNV-1a 64 mod 2: flow 1, motor_current 0); routing by asset puts them on one engine,
// which is what lets their alarms be grouped at all.
TEST(RunDaemonTest, OneFaultOnTwoChannelsOfAPumpIsOneAnnunciatedEpisode) {
  auto broker = StartBroker();
  ASSERT_TRUE(broker);
  auto witness = Watch(*broker, {kStatusTopic});
  ASSERT_TRUE(witness);
  auto started = DaemonProcess::Start(*broker, TestConfig());
  ASSERT_TRUE(started.ok()) << started.status().message();
  DaemonProcess& daemon = **started;
  const std::string current_topic = "brackwater/cw2/pump_a/motor_current";

  ASSERT_TRUE(PublishLines(*broker, kFlowTopic, FlowLines(0, 420, 10.0, 400, 430)).ok());
  ASSERT_TRUE(PublishLines(*broker, current_topic, FlowLines(0, 420, 10.0, 400, 430)).ok());
  ASSERT_TRUE(WaitFor([&] { return AlertsOf(*witness).size() >= 2; }, milliseconds(10000)))
      << daemon.log();
  ASSERT_TRUE(PublishLines(*broker, kFlowTopic, FlowLines(420, 700, 10.0, 400, 430)).ok());
  ASSERT_TRUE(PublishLines(*broker, current_topic, FlowLines(420, 700, 10.0, 400, 430)).ok());
  ASSERT_TRUE(WaitFor([&] { return AlertsOf(*witness).size() >= 4; }, milliseconds(10000)))
      << daemon.log();
  StopCleanly(daemon);

  const std::vector<Json> alerts = AlertsOf(*witness);
  ASSERT_EQ(alerts.size(), 4u) << witness->output();
  int raises = 0;
  int annunciated_raises = 0;
  int annunciated_clears = 0;
  std::string first_out;
  for (const Json& a : alerts) {
    ASSERT_TRUE(a["episode"].is_object()) << a.dump();
    EXPECT_EQ(a["episode"]["asset"], "cw2.pump_a");
    if (a["phase"] == "raise") {
      ++raises;
      if (a["annunciated"] == true) {
        ++annunciated_raises;
        first_out = a["channel"].get<std::string>();
      }
    } else if (a["annunciated"] == true) {
      ++annunciated_clears;
      EXPECT_EQ(a["episode"]["active"], 0) << a.dump();  // the episode's last clear
    }
  }
  EXPECT_EQ(raises, 2);
  EXPECT_EQ(annunciated_raises, 1) << witness->output();
  EXPECT_EQ(annunciated_clears, 1) << witness->output();
  for (const Json& a : alerts) EXPECT_EQ(a["episode"]["first_out"], first_out) << a.dump();
}

// Scrapes http://127.0.0.1:<port>/metrics with tests/daemon/scrape_openmetrics.py
// (Python's urllib as the independent client; it checks the text line by line against
// the OpenMetrics 1.0 format and that another path is 404) into a sample -> value map;
// empty when the scrape or the check failed (*error says why).
std::map<std::string, double> Scrape(const TestBroker& broker, int port, std::string* error) {
  static int serial = 0;
  const std::string out = broker.dir().File("scrape-" + std::to_string(++serial) + ".out");
  const core::Status s = RunCommand(
      {"/usr/bin/python3", std::string(NIGHTJAR_SOURCE_DIR) + "/tests/daemon/scrape_openmetrics.py",
       "http://127.0.0.1:" + std::to_string(port)},
      out);
  std::map<std::string, double> samples;
  if (!s.ok()) {
    *error = s.message();
    return samples;
  }
  const Json j = Json::parse(ReadFile(out), nullptr, false);
  if (!j.is_object()) {
    *error = "not a JSON object: " + ReadFile(out);
    return samples;
  }
  for (auto it = j.begin(); it != j.end(); ++it) samples[it.key()] = it.value().get<double>();
  return samples;
}

TEST(RunDaemonTest, MetricsEndpointCountsWhatWasSentAndParsesStrictly) {
  auto broker = StartBroker();
  ASSERT_TRUE(broker);
  const int port = FreeLocalPort();
  ASSERT_GT(port, 0);
  auto started = DaemonProcess::Start(
      *broker, TestConfig() + "  metrics_listen: \"127.0.0.1:" + std::to_string(port) + "\"\n");
  ASSERT_TRUE(started.ok()) << started.status().message();
  DaemonProcess& daemon = **started;
  ASSERT_TRUE(daemon.WaitLog("metrics: http://127.0.0.1:" + std::to_string(port) + "/metrics"));

  std::string error;
  std::map<std::string, double> m = Scrape(*broker, port, &error);
  ASSERT_FALSE(m.empty()) << error;
  EXPECT_EQ(m["nightjar_samples_received_total"], 0.0);
  EXPECT_EQ(m["nightjar_sample_latency_seconds_count"], 0.0);

  // 420 samples with a 20-sigma step from sample 400 (raises an anomaly), and one
  // payload that is not JSON.
  constexpr int kSent = 420;
  ASSERT_TRUE(PublishLines(*broker, kFlowTopic, FlowLines(0, kSent, 10.0, 400, 430)).ok());
  ASSERT_TRUE(PublishOne(*broker, kFlowTopic, "not json").ok());
  ASSERT_TRUE(WaitFor(
      [&] {
        m = Scrape(*broker, port, &error);
        return m["nightjar_samples_processed_total"] == kSent &&
               m["nightjar_payloads_bad_total"] == 1.0 &&
               m["nightjar_alerts_published_total{kind=\"anomaly\"}"] >= 1.0 &&
               m["nightjar_channels{state=\"in_alarm\"}"] == 1.0;
      },
      milliseconds(10000)))
      << error << "\n"
      << daemon.log();
  EXPECT_EQ(m["nightjar_samples_received_total"], kSent);
  EXPECT_EQ(m["nightjar_samples_dropped_total"], 0.0);
  EXPECT_EQ(m["nightjar_sample_latency_seconds_count"], kSent);
  EXPECT_EQ(m["nightjar_sample_latency_seconds_bucket{le=\"+Inf\"}"], kSent);
  EXPECT_GT(m["nightjar_sample_latency_seconds_sum"], 0.0);
  EXPECT_EQ(m["nightjar_channels{state=\"learning\"}"] + m["nightjar_channels{state=\"armed\"}"] +
                m["nightjar_channels{state=\"in_alarm\"}"] +
                m["nightjar_channels{state=\"stale\"}"],
            1.0);
  StopCleanly(daemon);
}

TEST(RunDaemonTest, MetricsPortInUseIsAStartupErrorNamingTheKey) {
  auto broker = StartBroker();
  ASSERT_TRUE(broker);
  // Someone else listens on the port first.
  const int holder = ::socket(AF_INET, SOCK_STREAM, 0);
  ASSERT_GE(holder, 0);
  sockaddr_in addr{};
  addr.sin_family = AF_INET;
  addr.sin_addr.s_addr = htonl(INADDR_LOOPBACK);
  addr.sin_port = 0;
  socklen_t len = sizeof(addr);
  ASSERT_EQ(::bind(holder, reinterpret_cast<sockaddr*>(&addr), sizeof(addr)), 0);
  ASSERT_EQ(::listen(holder, 1), 0);
  ASSERT_EQ(::getsockname(holder, reinterpret_cast<sockaddr*>(&addr), &len), 0);
  const int port = ntohs(addr.sin_port);

  const std::string config_path = broker->dir().File("busy.yaml");
  const std::string log_path = broker->dir().File("busy.log");
  WriteFile(config_path,
            TestConfig() + "  metrics_listen: \"127.0.0.1:" + std::to_string(port) + "\"\n");
  auto child = ChildProcess::Spawn({NIGHTJAR_BINARY, "run", "--config", config_path, "--broker",
                                    "127.0.0.1:" + std::to_string(broker->port())},
                                   log_path);
  ASSERT_TRUE(child.ok()) << child.status().message();
  ASSERT_TRUE((*child)->WaitExit(milliseconds(10000))) << ReadFile(log_path);
  ::close(holder);
  EXPECT_EQ((*child)->exit_code(), 1);
  const std::string log = ReadFile(log_path);
  EXPECT_NE(log.find(config_path + ": daemon.metrics_listen: cannot listen on 127.0.0.1:" +
                     std::to_string(port) + ": Address already in use"),
            std::string::npos)
      << log;
}

TEST(RunDaemonTest, BadPayloadsAreCountedWithoutAlarmStormOrLogFlood) {
  auto broker = StartBroker();
  ASSERT_TRUE(broker);
  auto witness = Watch(*broker, {kStatusTopic});
  ASSERT_TRUE(witness);
  auto started = DaemonProcess::Start(*broker, TestConfig());
  ASSERT_TRUE(started.ok()) << started.status().message();
  DaemonProcess& daemon = **started;

  ASSERT_TRUE(PublishLines(*broker, kFlowTopic, FlowLines(0, 300)).ok());
  std::string bad;
  for (int i = 0; i < 200; ++i) {
    switch (i % 4) {
      case 0:
        bad += "abc\n";
        break;
      case 1:
        bad += "{\"t\":" + std::to_string(kT0 + 300) + "}\n";  // no value
        break;
      case 2:
        bad += "{\"t\":\"soon\",\"value\":1}\n";  // time not a number
        break;
      default:
        bad += "{\"t\":1780000300,\"value\":\"high\"}\n";  // value not a number
    }
  }
  ASSERT_TRUE(PublishLines(*broker, kFlowTopic, bad).ok());
  ASSERT_TRUE(PublishLines(*broker, kFlowTopic, FlowLines(300, 350)).ok());
  Json state;
  ASSERT_TRUE(WaitFor(
      [&] {
        state = StateOf(*broker, kFlowState);
        return state.is_object() && state.value("samples", 0) == 350;
      },
      milliseconds(10000)))
      << state.dump();
  EXPECT_EQ(state["state"], "armed");

  StopCleanly(daemon);
  ASSERT_TRUE(WaitFor([&] { return HasStatus(*witness, "offline"); }, milliseconds(5000)));
  const Json last = LastStatus(*witness);
  EXPECT_EQ(last["bad_payloads"], 200) << last.dump() << daemon.log();
  EXPECT_EQ(last["samples"], 350);
  EXPECT_TRUE(AlertsOf(*witness).empty()) << witness->output();
  // BadPayloadLog: the first bad payload of the channel is logged at once, the rest of the
  // burst within its 60 s window only counted.
  const int lines = daemon.CountInLog("topic brackwater/cw2/pump_a/flow:");
  EXPECT_GE(lines, 1) << daemon.log();
  EXPECT_LE(lines, 2) << daemon.log();
  // The subscription brackwater/+/+/+ also covers the status topic: the daemon must not
  // read its own output as samples.
  EXPECT_EQ(daemon.CountInLog("topic brackwater/cw2/nightjar/"), 0) << daemon.log();
}

TEST(RunDaemonTest, SighupKeepsTheOldConfigWhenBrokenAndAppliesAGoodOne) {
  auto broker = StartBroker();
  ASSERT_TRUE(broker);
  auto witness = Watch(*broker, {kStatusTopic});
  ASSERT_TRUE(witness);
  auto started = DaemonProcess::Start(*broker, TestConfig());
  ASSERT_TRUE(started.ok()) << started.status().message();
  DaemonProcess& daemon = **started;
  const std::string b_topic = "brackwater/cw2/pump_b/flow";
  const std::string b_state = std::string(kStatePrefix) + "/cw2/pump_b/flow";

  ASSERT_TRUE(PublishLines(*broker, kFlowTopic, FlowLines(0, 300)).ok());
  ASSERT_TRUE(PublishLines(*broker, b_topic, FlowLines(0, 300)).ok());
  ASSERT_TRUE(StateIs(*broker, kFlowState, "armed"));
  ASSERT_TRUE(StateIs(*broker, b_state, "armed"));

  // A broken file: rejected with its error (file:line:col: key path) logged; still running.
  WriteFile(daemon.config_path(), TestConfig("  bogus_key: 1\n"));
  daemon.process().Signal(SIGHUP);
  ASSERT_TRUE(daemon.WaitLog("reload refused")) << daemon.log();
  EXPECT_NE(daemon.log().find("nightjar.yaml:8:3: defaults.bogus_key: unknown key"),
            std::string::npos)
      << daemon.log();
  ASSERT_TRUE(PublishLines(*broker, kFlowTopic, FlowLines(300, 320)).ok());
  Json state;
  ASSERT_TRUE(WaitFor(
      [&] {
        state = StateOf(*broker, kFlowState);
        return state.is_object() && state.value("samples", 0) == 320;
      },
      milliseconds(10000)))
      << state.dump();
  EXPECT_EQ(state["state"], "armed");

  // A good file that changes pump A only: A learns again with the new options, B keeps
  // what it learnt.
  WriteFile(daemon.config_path(),
            TestConfig("", "  - match: \"cw2.pump_a.*\"\n    anomaly_priority: high\n"));
  daemon.process().Signal(SIGHUP);
  ASSERT_TRUE(daemon.WaitLog("reloaded")) << daemon.log();
  EXPECT_TRUE(StateIs(*broker, kFlowState, "learning", &state)) << state.dump();
  EXPECT_EQ(daemon.CountInLog("cw2.pump_b.flow has new options"), 0);
  EXPECT_EQ(daemon.CountInLog("mqtt: or daemon: changed"), 0);  // only channels: changed
  const Json b = StateOf(*broker, b_state);
  EXPECT_EQ(b.value("state", ""), "armed") << b.dump();
  EXPECT_EQ(b.value("samples", 0), 300) << b.dump();

  // After learning again, a step on A raises at the new priority.
  ASSERT_TRUE(PublishLines(*broker, kFlowTopic, FlowLines(1000, 1250, 10.0, 1230, 1250)).ok());
  ASSERT_TRUE(WaitFor([&] { return AlertsOf(*witness).size() >= 1; }, milliseconds(10000)))
      << daemon.log();
  EXPECT_EQ(AlertsOf(*witness)[0]["priority"], "high");

  StopCleanly(daemon);
  ASSERT_TRUE(WaitFor([&] { return HasStatus(*witness, "offline"); }, milliseconds(5000)));
  const Json last = LastStatus(*witness);
  EXPECT_EQ(last["reloads"], 1) << last.dump();
  EXPECT_EQ(last["reload_failures"], 1);
}

// Alerts raised while the broker is down wait in the client's outbox and reach a
// subscriber after the broker is back, none lost. The alert is a gap alarm: with
// gap_periods 3 on a 1 s channel, 3 s of silence (the broker is gone) raises it while
// disconnected. The subscriber holds a persistent session (clean session off, QoS 1) on a
// broker with persistence on, so the broker keeps what arrives for it while it is away
// (MQTT 3.1.1 section 3.1.2.4).
TEST(RunDaemonTest, AlertsRaisedWhileTheBrokerIsDownArriveAfterItReturns) {
  TempDir store;
  const std::string persistence = "persistence true\npersistence_location " + store.path() + "/\n";
  core::Result<std::unique_ptr<TestBroker>> started_broker = TestBroker::Start(persistence);
  ASSERT_TRUE(started_broker.ok()) << started_broker.status().message();
  TestBroker& broker = **started_broker;
  const std::string port = std::to_string(broker.port());
  const std::vector<std::string> witness_argv = {
      "stdbuf", "-oL",       "mosquitto_sub",
      "-h",     "127.0.0.1", "-p",
      port,     "-i",        "cw2-outbox-witness",
      "-c",     "-q",        "1",
      "-d",     "-t",        std::string(kAlertPrefix) + "/#",
      "-F",     "MSG %t %p"};
  const std::string first_out = broker.dir().File("witness-first.out");
  {
    auto first = ChildProcess::Spawn(witness_argv, first_out);
    ASSERT_TRUE(first.ok());
    ASSERT_TRUE(
        WaitFor([&] { return ReadFile(first_out).find("Subscribed") != std::string::npos; }));
    (*first)->Terminate();  // the session stays at the broker
  }
  auto started = DaemonProcess::Start(
      broker, TestConfig("", "  - match: \"cw2.**\"\n    sensor: { gap_periods: 3 }\n"));
  ASSERT_TRUE(started.ok()) << started.status().message();
  DaemonProcess& daemon = **started;
  ASSERT_TRUE(PublishLines(broker, kFlowTopic, FlowLines(0, 300)).ok());
  ASSERT_TRUE(StateIs(broker, kFlowState, "armed"));

  broker.Stop();
  ASSERT_TRUE(daemon.WaitLog("lost; reconnecting")) << daemon.log();
  ASSERT_TRUE(daemon.WaitLog("alert raise cw2.pump_a.flow sensor gap")) << daemon.log();
  ASSERT_TRUE(broker.Restart(persistence).ok());
  const std::string second_out = broker.dir().File("witness-second.out");
  auto second = ChildProcess::Spawn(witness_argv, second_out);
  ASSERT_TRUE(second.ok());
  ASSERT_TRUE(WaitFor(
      [&] { return ReadFile(second_out).find("\"detector\":\"gap\"") != std::string::npos; },
      milliseconds(20000)))
      << ReadFile(second_out) << daemon.log();
  EXPECT_EQ(daemon.CountInLog("connected to broker"), 2) << daemon.log();
  // Every alert the daemon logged reached the subscriber, once.
  ASSERT_TRUE(WaitFor(
      [&] {
        const std::string text = ReadFile(second_out);
        int n = 0;
        for (std::size_t at = text.find("MSG "); at != std::string::npos;
             at = text.find("MSG ", at + 1))
          ++n;
        return n == daemon.CountInLog("info alert ");
      },
      milliseconds(5000)))
      << ReadFile(second_out) << daemon.log();
  StopCleanly(daemon);
}

// systemd notifications, read from a NOTIFY_SOCKET of our own (sd_notify(3) sends one
// datagram per call to the AF_UNIX socket that variable names; WATCHDOG_USEC asks for
// keep-alives, sd_watchdog_enabled(3)): READY=1 once connected and subscribed, WATCHDOG=1
// at least every half interval, a STATUS= line, STOPPING=1 on SIGTERM.
TEST(RunDaemonTest, TellsSystemdReadyWatchdogStatusAndStopping) {
  auto broker = StartBroker();
  ASSERT_TRUE(broker);
  const std::string path = broker->dir().File("notify.sock");
  const int fd = ::socket(AF_UNIX, SOCK_DGRAM | SOCK_NONBLOCK, 0);
  ASSERT_GE(fd, 0);
  sockaddr_un addr{};
  addr.sun_family = AF_UNIX;
  ASSERT_LT(path.size(), sizeof(addr.sun_path));
  std::copy(path.begin(), path.end(), addr.sun_path);
  ASSERT_EQ(::bind(fd, reinterpret_cast<sockaddr*>(&addr), sizeof(addr)), 0);
  ::setenv("NOTIFY_SOCKET", path.c_str(), 1);
  ::setenv("WATCHDOG_USEC", "400000", 1);
  auto started = DaemonProcess::Start(*broker, TestConfig());
  ::unsetenv("NOTIFY_SOCKET");
  ::unsetenv("WATCHDOG_USEC");
  ASSERT_TRUE(started.ok()) << started.status().message();
  DaemonProcess& daemon = **started;

  std::vector<std::string> messages;
  const auto count = [&](const std::string& prefix) {
    char buffer[4096];
    for (;;) {
      const ssize_t n = ::recv(fd, buffer, sizeof(buffer), 0);
      if (n <= 0) break;
      messages.emplace_back(buffer, static_cast<std::size_t>(n));
    }
    int k = 0;
    for (const std::string& m : messages) k += m.rfind(prefix, 0) == 0 ? 1 : 0;
    return k;
  };
  EXPECT_TRUE(WaitFor([&] { return count("READY=1") == 1; }));
  EXPECT_TRUE(WaitFor([&] { return count("WATCHDOG=1") >= 3; }));
  EXPECT_TRUE(WaitFor([&] { return count("STATUS=") >= 1; }));
  StopCleanly(daemon);
  EXPECT_TRUE(WaitFor([&] { return count("STOPPING=1") == 1; }, milliseconds(2000)));
  EXPECT_EQ(count("READY=1"), 1);
  ::close(fd);
}

TEST(RunDaemonTest, ConfigErrorsExitOneNamingFileLineAndKey) {
  TempDir dir;
  const std::string config = dir.File("bad.yaml");
  WriteFile(config, "mqtt:\n  port: 0\n  subscriptions: []\n");
  const std::string out = dir.File("out");
  auto child = ChildProcess::Spawn({NIGHTJAR_BINARY, "run", "--config", config}, out);
  ASSERT_TRUE(child.ok());
  ASSERT_TRUE((*child)->WaitExit(milliseconds(10000)));
  EXPECT_EQ((*child)->exit_code(), 1);
  EXPECT_NE(ReadFile(out).find(config + ":2:9: mqtt.port: must be in [1, 65535], got 0"),
            std::string::npos)
      << ReadFile(out);

  WriteFile(config, "defaults: {}\n");  // loads, but gives nightjar run nothing to listen to
  auto second = ChildProcess::Spawn({NIGHTJAR_BINARY, "run", "--config", config}, out + "2");
  ASSERT_TRUE(second.ok());
  ASSERT_TRUE((*second)->WaitExit(milliseconds(10000)));
  EXPECT_EQ((*second)->exit_code(), 1);
  EXPECT_NE(ReadFile(out + "2").find("mqtt.subscriptions: nightjar run needs at least one"),
            std::string::npos)
      << ReadFile(out + "2");

  auto usage = ChildProcess::Spawn({NIGHTJAR_BINARY, "run"}, out + "3");
  ASSERT_TRUE(usage.ok());
  ASSERT_TRUE((*usage)->WaitExit(milliseconds(10000)));
  EXPECT_EQ((*usage)->exit_code(), 2);
}

}  // namespace
}  // namespace nightjar::testing
