// Harness for the `nightjar run` integration tests: the real nightjar binary as a child
// process against a real mosquitto on a free 127.0.0.1 port (tests/mqtt/broker_fixture.h),
// samples published by mosquitto_pub and everything checked through mosquitto_sub.
//
// Waits are on conditions with deadlines (WaitFor), never bare sleeps.
// Thread-safety: test thread only. Ownership: each object owns its process and files.
#pragma once

#include <cmath>
#include <cstdint>
#include <memory>
#include <random>
#include <sstream>
#include <string>
#include <vector>

#include "mqtt/broker_fixture.h"

namespace nightjar::testing {

// Topics of the test config.
inline constexpr const char* kAlertPrefix = "brackwater/cw2/nightjar/alert";
inline constexpr const char* kStatePrefix = "brackwater/cw2/nightjar/state";
inline constexpr const char* kStatusTopic = "brackwater/cw2/nightjar/status";
inline constexpr const char* kCommandTopic = "brackwater/cw2/nightjar/command";
inline constexpr const char* kReplyTopic = "brackwater/cw2/nightjar/reply";

// A config with short learning (last-value forecaster, 200 samples) so a test warms a
// channel up in a fraction of a second; samples are JSON {"t": epoch seconds, "value": x}
// on brackwater/<area>/<asset>/<signal>. `extra_defaults` and `channels` are appended
// under defaults: and as the channels: list; `state_dir` is daemon.state_dir ("" = no
// checkpoints, so a test never writes to the system's folder).
inline std::string TestConfig(const std::string& extra_defaults = "",
                              const std::string& channels = "", const std::string& state_dir = "") {
  return std::string(
             "defaults:\n"
             "  forecaster: last_value\n"
             "  warmup_samples: 200\n"
             "  sample_period_s: 1\n"
             "  scaler: { warmup_samples: 20 }\n"
             "  sensor: { flatline_samples: 0, gap_periods: 100000 }\n"
             "  anomaly_alarm: { off_delay_s: 5 }\n") +
         extra_defaults + "channels:\n" + (channels.empty() ? "  []\n" : channels) +
         "mqtt:\n"
         "  client_id: nightjar-under-test\n"
         "  keepalive_s: 5\n"
         "  alert_prefix: " +
         kAlertPrefix + "\n  state_prefix: " + kStatePrefix + "\n  status_topic: " + kStatusTopic +
         "\n  command_topic: " + kCommandTopic + "\n  reply_topic: " + kReplyTopic +
         "\n"
         "  subscriptions:\n"
         "    - topic: \"brackwater/{area}/{asset}/{signal}\"\n"
         "      channel: \"{area}.{asset}.{signal}\"\n"
         "      payload: json\n"
         "      time_field: t\n"
         "      time_unit: epoch_s\n"
         "daemon:\n"
         "  workers: 2\n"
         "  publish_interval_s: 0.2\n"
         "  state_dir: \"" +
         state_dir + "\"\n";
}

inline constexpr std::int64_t kT0 = 1'780'000'000;  // 2026-05-28T20:26:40Z

// Samples i in [from, to) of a steady flow, 50 m3/h with N(0, 0.5) noise (fixed seed per
// sample index), plus `step` added for i in [step_from, step_to): one JSON line each.
inline std::string FlowLines(int from, int to, double step = 0.0, int step_from = 0,
                             int step_to = 0) {
  std::ostringstream out;
  for (int i = from; i < to; ++i) {
    std::mt19937_64 rng(static_cast<std::uint64_t>(i) * 7919u + 3u);
    std::normal_distribution<double> noise(0.0, 0.5);
    double v = 50.0 + noise(rng);
    if (i >= step_from && i < step_to) v += step;
    out << "{\"t\":" << (kT0 + i) << ",\"value\":" << v << "}\n";
  }
  return out.str();
}

// Publishes every line of `lines` as one message on `topic` (mosquitto_pub -l, QoS 1).
inline core::Status PublishLines(const TestBroker& broker, const std::string& topic,
                                 const std::string& lines) {
  static int serial = 0;
  const std::string input = broker.dir().File("pub-" + std::to_string(++serial) + ".in");
  WriteFile(input, lines);
  return RunCommand({"mosquitto_pub", "-h", "127.0.0.1", "-p", std::to_string(broker.port()), "-q",
                     "1", "-t", topic, "-l"},
                    input + ".out", input);
}

inline core::Status PublishOne(const TestBroker& broker, const std::string& topic,
                               const std::string& payload) {
  static int serial = 0;
  return RunCommand({"mosquitto_pub", "-h", "127.0.0.1", "-p", std::to_string(broker.port()), "-q",
                     "1", "-t", topic, "-m", payload},
                    broker.dir().File("pub1-" + std::to_string(++serial) + ".out"));
}

// The retained message on `topic` as "<retain> <payload>", read by a late mosquitto_sub
// (empty if none within 3 s).
inline std::string ReadRetained(const TestBroker& broker, const std::string& topic) {
  static int serial = 0;
  const std::string out = broker.dir().File("late-" + std::to_string(++serial) + ".out");
  const core::Status s =
      RunCommand({"mosquitto_sub", "-h", "127.0.0.1", "-p", std::to_string(broker.port()), "-t",
                  topic, "-C", "1", "-W", "3", "-F", "%r %p"},
                 out, "/dev/null", milliseconds(6000));
  std::string text = ReadFile(out);
  while (!text.empty() && (text.back() == '\n' || text.back() == '\r')) text.pop_back();
  return s.ok() ? text : "";
}

// Polls the retained message on `topic` until `predicate` holds for it.
template <typename Predicate>
bool WaitRetained(const TestBroker& broker, const std::string& topic, Predicate predicate,
                  milliseconds timeout = milliseconds(10000), std::string* last = nullptr) {
  std::string seen;
  const bool ok = WaitFor(
      [&] {
        seen = ReadRetained(broker, topic);
        return predicate(seen);
      },
      timeout);
  if (last != nullptr) *last = seen;
  return ok;
}

// `nightjar run` on `broker`, its config at <broker dir>/<name>.yaml and its log
// (stdout and stderr) at <broker dir>/<name>.log; `extra_args` go after the usual ones.
class DaemonProcess {
 public:
  static core::Result<std::unique_ptr<DaemonProcess>> Start(
      const TestBroker& broker, const std::string& config,
      const std::vector<std::string>& extra_args = {}, const std::string& name = "nightjar") {
    std::unique_ptr<DaemonProcess> d(new DaemonProcess());
    d->config_path_ = broker.dir().File(name + ".yaml");
    d->log_path_ = broker.dir().File(name + ".log");
    WriteFile(d->config_path_, config);
    std::vector<std::string> argv{NIGHTJAR_BINARY, "run",
                                  "--config",      d->config_path_,
                                  "--broker",      "127.0.0.1:" + std::to_string(broker.port())};
    argv.insert(argv.end(), extra_args.begin(), extra_args.end());
    core::Result<std::unique_ptr<ChildProcess>> child = ChildProcess::Spawn(argv, d->log_path_);
    if (!child.ok()) return child.status();
    d->process_ = std::move(child).value();
    if (!d->WaitLog("ready: connected and subscribed")) {
      return core::Status::Unavailable("nightjar run did not get ready: " + d->log());
    }
    return d;
  }

  ChildProcess& process() { return *process_; }
  std::string log() const { return ReadFile(log_path_); }
  const std::string& config_path() const { return config_path_; }
  bool WaitLog(const std::string& text, milliseconds timeout = milliseconds(10000)) {
    return WaitFor([&] { return log().find(text) != std::string::npos; }, timeout);
  }
  // How often `text` occurs in the log.
  int CountInLog(const std::string& text) const {
    const std::string all = log();
    int n = 0;
    for (std::size_t at = all.find(text); at != std::string::npos; at = all.find(text, at + 1)) {
      ++n;
    }
    return n;
  }

 private:
  DaemonProcess() = default;
  std::string config_path_;
  std::string log_path_;
  std::unique_ptr<ChildProcess> process_;
};

// Messages of a witness whose topic starts with `prefix`, as (topic, payload).
inline std::vector<std::pair<std::string, std::string>> MessagesUnder(const Witness& witness,
                                                                      const std::string& prefix) {
  std::vector<std::pair<std::string, std::string>> out;
  for (const std::string& m : witness.Messages()) {
    // "<retain> <qos> <topic> <payload>"
    const std::size_t a = m.find(' ');
    const std::size_t b = m.find(' ', a + 1);
    const std::size_t c = m.find(' ', b + 1);
    if (c == std::string::npos) continue;
    std::string topic = m.substr(b + 1, c - b - 1);
    if (topic.rfind(prefix, 0) == 0) out.emplace_back(std::move(topic), m.substr(c + 1));
  }
  return out;
}

}  // namespace nightjar::testing
