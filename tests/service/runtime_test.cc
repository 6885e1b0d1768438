// Runtime and BuildServiceOptions in-process over FakeBus (tests/fakes/fake_bus.h): samples
// routed to several workers, alerts and retained state on the right topics, commands
// answered, the daemon's own topics never read back as samples, offline status on stop.
// The broker-level behaviour is covered by tests/daemon/ against a real mosquitto.
// The step is 20 sigma on a last-value forecaster: far beyond any chart limit (common
// practice).
#include "service/runtime.h"

#include <gtest/gtest.h>

#include <chrono>
#include <cmath>
#include <condition_variable>
#include <map>
#include <mutex>
#include <nlohmann/json.hpp>
#include <random>
#include <string>
#include <thread>

#include "config/config.h"
#include "fakes/fake_bus.h"
#include "service/service_options.h"

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

constexpr const char* kConfig = R"(defaults:
  forecaster: last_value
  warmup_samples: 200
  sample_period_s: 1
  scaler: { warmup_samples: 20 }
  sensor: { flatline_samples: 0, gap_periods: 100000 }
mqtt:
  alert_prefix: cw2/alert
  state_prefix: cw2/state
  status_topic: cw2/status
  command_topic: cw2/command
  reply_topic: cw2/reply
  subscriptions:
    - topic: "{area}/{asset}/{signal}"
      channel: "{area}.{asset}.{signal}"
      payload: json
      time_field: t
      time_unit: epoch_s
daemon:
  workers: 3
  publish_interval_s: 0.1
  state_dir: ""
)";

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

// A clock that holds any thread but the test's own (the worker reads the clock right
// after taking its queue) until Release(), so the test thread can deliver into a queue
// that nobody drains.
class WorkerHoldingClock {
 public:
  Runtime::Clock clock() {
    return [this]() -> core::TimestampUs {
      if (std::this_thread::get_id() != test_thread_) {
        std::unique_lock lock(mutex_);
        held_ = true;
        changed_.notify_all();
        changed_.wait(lock, [&] { return release_; });
      }
      return Now();
    };
  }
  // True once a worker waits inside the clock (within 10 s).
  bool WaitUntilHeld() {
    std::unique_lock lock(mutex_);
    return changed_.wait_for(lock, std::chrono::seconds(10), [&] { return held_; });
  }
  void Release() {
    {
      const std::lock_guard lock(mutex_);
      release_ = true;
    }
    changed_.notify_all();
  }

 private:
  const std::thread::id test_thread_ = std::this_thread::get_id();
  std::mutex mutex_;
  std::condition_variable changed_;
  bool held_ = false;     // the worker is waiting inside the clock
  bool release_ = false;  // let it go
};

std::string Sample(int i, double value) {
  return std::string("{\"t\":")
      .append(std::to_string(1'780'000'000 + i))
      .append(",\"value\":")
      .append(std::to_string(value))
      .append("}");
}

TEST(RuntimeTest, RoutesSamplesToWorkersAndPublishesAlertsStateAndReplies) {
  const auto config = Load(kConfig);
  ASSERT_TRUE(config);
  core::Result<ServiceOptions> options = BuildServiceOptions(*config, "test.yaml", std::nullopt);
  ASSERT_TRUE(options.ok()) << options.status().message();
  testing::FakeBus bus;
  auto runtime = Runtime::Create(*options, config, bus, Now);
  ASSERT_TRUE(runtime.ok()) << runtime.status().message();
  Runtime& rt = **runtime;
  ASSERT_TRUE(rt.Start().ok());

  const char* channels[] = {"cw2/pump_a/flow", "cw2/pump_b/flow", "cw2/tank/level",
                            "cw2/pump_a/discharge_pressure"};
  std::mt19937_64 rng(5);
  std::normal_distribution<double> noise(0.0, 0.5);
  for (int i = 0; i < 300; ++i) {
    for (const char* topic : channels) {
      const bool step = std::string(topic) == "cw2/tank/level" && i >= 280;
      ASSERT_TRUE(bus.Deliver(topic, Sample(i, 50.0 + noise(rng) + (step ? 10.0 : 0.0))));
    }
  }
  // The daemon's own output is covered by the subscription {area}/{asset}/{signal}: it
  // must not come back in as samples or bad payloads.
  ASSERT_TRUE(bus.Deliver("cw2/state/x", "{}"));
  ASSERT_TRUE(bus.Deliver("cw2/command", R"({"action":"acknowledge","channel":"cw2.nowhere"})"));
  ASSERT_TRUE(WaitFor([&] { return rt.counters().samples == 1200; }, std::chrono::seconds(10)));
  ASSERT_TRUE(WaitFor(
      [&] {
        for (const auto& m : bus.published()) {
          if (m.topic == "cw2/reply") return true;
        }
        return false;
      },
      std::chrono::seconds(10)));
  rt.Stop();

  const auto published = bus.published();
  int raises = 0;
  Json reply;
  std::map<std::string, Json> state;
  for (const auto& m : published) {
    if (m.topic.rfind("cw2/alert/", 0) == 0) {
      const Json a = Json::parse(m.payload);
      EXPECT_EQ(m.topic, "cw2/alert/cw2/tank/level");
      EXPECT_FALSE(m.retain);
      if (a["phase"] == "raise") ++raises;
    } else if (m.topic.rfind("cw2/state/", 0) == 0) {
      EXPECT_TRUE(m.retain);
      state[m.topic] = Json::parse(m.payload);
    } else if (m.topic == "cw2/reply") {
      reply = Json::parse(m.payload);
    }
  }
  EXPECT_EQ(raises, 1);
  ASSERT_EQ(state.size(), 4u);
  EXPECT_EQ(state["cw2/state/cw2/tank/level"]["state"], "in_alarm");
  EXPECT_EQ(state["cw2/state/cw2/pump_a/flow"]["state"], "armed");
  EXPECT_EQ(state["cw2/state/cw2/pump_a/flow"]["samples"], 300);
  EXPECT_EQ(reply["ok"], false);
  EXPECT_EQ(reply["error"], "no channel named 'cw2.nowhere'");
  ASSERT_FALSE(published.empty());
  EXPECT_EQ(published.back().topic, "cw2/status");
  EXPECT_TRUE(published.back().retain);
  EXPECT_EQ(Json::parse(published.back().payload)["state"], "offline");
  const StatusCounters c = rt.counters();
  EXPECT_EQ(c.channels, 4);
  EXPECT_EQ(c.bad_payloads, 0u);
  EXPECT_EQ(c.commands, 1u);
  EXPECT_EQ(c.dropped, 0u);

  // The metrics endpoint's figures agree with what was delivered and published.
  const MetricsSnapshot m = rt.metrics();
  EXPECT_EQ(m.samples_received, 1200u);
  EXPECT_EQ(m.samples_processed, 1200u);
  EXPECT_EQ(m.samples_dropped, 0u);
  std::uint64_t latency_count = 0;
  for (const std::uint64_t n : m.latency.counts) latency_count += n;
  EXPECT_EQ(latency_count, 1200u);
  EXPECT_GT(m.latency.sum, 0.0);
  int alerts = 0;
  for (const auto& p : published) alerts += p.topic.rfind("cw2/alert/", 0) == 0 ? 1 : 0;
  EXPECT_EQ(m.alerts_by_kind[static_cast<std::size_t>(core::AlertKind::kAnomaly)],
            static_cast<std::uint64_t>(alerts));
  EXPECT_EQ(m.channels_by_state[static_cast<std::size_t>(core::ChannelState::kInAlarm)], 1);
  EXPECT_EQ(m.channels_by_state[static_cast<std::size_t>(core::ChannelState::kArmed)], 3);
  EXPECT_EQ(m.channels_by_state[static_cast<std::size_t>(core::ChannelState::kLearning)], 0);
}

// A full worker queue drops samples, counted, and never blocks the delivering (network)
// thread. Made deterministic by a clock that holds the worker thread (the worker reads
// the clock right after taking its queue) while the test thread delivers.
TEST(RuntimeTest, FullQueueDropsAndCountsWithoutBlockingTheNetworkThread) {
  std::string text = kConfig;
  text.replace(text.find("  workers: 3"), std::string("  workers: 3").size(),
               "  workers: 1\n  queue_capacity: 16");
  const auto config = Load(text);
  ASSERT_TRUE(config);
  core::Result<ServiceOptions> options = BuildServiceOptions(*config, "test.yaml", std::nullopt);
  ASSERT_TRUE(options.ok()) << options.status().message();
  ASSERT_EQ(options->queue_capacity, 16u);

  WorkerHoldingClock holder;
  testing::FakeBus bus;
  auto runtime = Runtime::Create(*options, config, bus, holder.clock());
  ASSERT_TRUE(runtime.ok()) << runtime.status().message();
  Runtime& rt = **runtime;
  ASSERT_TRUE(rt.Start().ok());
  ASSERT_TRUE(holder.WaitUntilHeld());
  for (int i = 0; i < 100; ++i) ASSERT_TRUE(bus.Deliver("cw2/pump_a/flow", Sample(i, 50.0)));
  EXPECT_EQ(rt.counters().dropped, 84u);
  holder.Release();
  ASSERT_TRUE(WaitFor([&] { return rt.counters().samples == 16; }, std::chrono::seconds(10)));
  rt.Stop();
  EXPECT_EQ(rt.counters().samples, 16u);
  EXPECT_EQ(rt.counters().dropped, 84u);
}

// The network thread hands a bus batch to a worker in one go at the batch's end: what
// fits the queue is taken from the front, the rest is dropped and counted, with one hole
// per channel that lost samples.
TEST(RuntimeTest, ABatchIsHandedOverAtItsEndAndWhatDoesNotFitIsDroppedAndCounted) {
  std::string text = kConfig;
  text.replace(text.find("  workers: 3"), std::string("  workers: 3").size(),
               "  workers: 1\n  queue_capacity: 16");
  const auto config = Load(text);
  ASSERT_TRUE(config);
  core::Result<ServiceOptions> options = BuildServiceOptions(*config, "test.yaml", std::nullopt);
  ASSERT_TRUE(options.ok()) << options.status().message();

  // Holds the worker thread in its clock while the test thread delivers the batch.
  WorkerHoldingClock holder;
  testing::FakeBus bus;
  auto runtime = Runtime::Create(*options, config, bus, holder.clock());
  ASSERT_TRUE(runtime.ok()) << runtime.status().message();
  Runtime& rt = **runtime;
  ASSERT_TRUE(rt.Start().ok());
  ASSERT_TRUE(holder.WaitUntilHeld());
  // 50 samples of each of two channels, interleaved, in one batch: the first 16 fit.
  std::vector<std::pair<std::string, std::string>> batch;
  for (int i = 0; i < 50; ++i) {
    batch.emplace_back("cw2/pump_a/flow", Sample(i, 50.0));
    batch.emplace_back("cw2/pump_b/flow", Sample(i, 40.0));
  }
  ASSERT_EQ(bus.DeliverBatch(batch), 100u);
  EXPECT_EQ(rt.counters().dropped, 84u);
  EXPECT_EQ(rt.counters().drop_holes, 2u) << "one hole per channel";
  EXPECT_EQ(rt.metrics().samples_received, 100u);
  holder.Release();
  ASSERT_TRUE(WaitFor([&] { return rt.counters().samples == 16; }, std::chrono::seconds(10)));
  EXPECT_EQ(rt.counters().channels, 2);
  rt.Stop();
  EXPECT_EQ(rt.counters().samples, 16u);
  EXPECT_EQ(rt.counters().dropped, 84u);
}

// The hole that dropped samples leave in a channel's stream is nightjar's own: no gap
// alarm for it, one hole counted on the status and the metrics. The same silence with no
// drop behind it is a gap (gap_periods 3 on a 1 s channel: no sample for more than 3 s;
// the gap rule is the engine's, common practice for telemetry staleness).
TEST(RuntimeTest, SamplesDroppedAtAFullQueueRaiseNoGapAndAreCountedAsAHole) {
  std::string text = kConfig;
  text.replace(text.find("gap_periods: 100000"), std::string("gap_periods: 100000").size(),
               "gap_periods: 3");
  text.replace(text.find("  workers: 3"), std::string("  workers: 3").size(),
               "  workers: 1\n  queue_capacity: 16");
  const auto config = Load(text);
  ASSERT_TRUE(config);
  core::Result<ServiceOptions> options = BuildServiceOptions(*config, "test.yaml", std::nullopt);
  ASSERT_TRUE(options.ok()) << options.status().message();

  // Holds the worker thread in its clock while the test thread overfills the queue.
  WorkerHoldingClock holder;
  testing::FakeBus bus;
  auto runtime = Runtime::Create(*options, config, bus, holder.clock());
  ASSERT_TRUE(runtime.ok()) << runtime.status().message();
  Runtime& rt = **runtime;
  ASSERT_TRUE(rt.Start().ok());
  ASSERT_TRUE(holder.WaitUntilHeld());
  // Samples 0..15 fit, 16..99 are dropped: an 85 s hole in the channel's stream.
  for (int i = 0; i < 100; ++i)
    ASSERT_TRUE(bus.Deliver("cw2/pump_a/flow", Sample(i, 50.0 + i % 3)));
  EXPECT_EQ(rt.counters().dropped, 84u);
  EXPECT_EQ(rt.counters().drop_holes, 1u) << "one hole, however many samples it lost";
  holder.Release();
  ASSERT_TRUE(WaitFor([&] { return rt.counters().samples == 16; }, std::chrono::seconds(10)));
  for (int i = 100; i < 105; ++i) ASSERT_TRUE(bus.Deliver("cw2/pump_a/flow", Sample(i, 50.0)));
  ASSERT_TRUE(WaitFor([&] { return rt.counters().samples == 21; }, std::chrono::seconds(10)));

  const auto gap_raises = [&bus] {
    int n = 0;
    for (const auto& m : bus.published()) {
      if (m.topic.rfind("cw2/alert/", 0) != 0) continue;
      const Json a = Json::parse(m.payload);
      n += a["detector"] == "gap" && a["phase"] == "raise" ? 1 : 0;
    }
    return n;
  };
  EXPECT_EQ(gap_raises(), 0) << "the hole nightjar made is not a sensor gap";
  const Json status = Json::parse(StatusJson("online", "", 0, Now(), rt.counters()));
  EXPECT_EQ(status["drop_holes"], 1);
  EXPECT_EQ(status["dropped"], 84);
  EXPECT_EQ(rt.metrics().drop_holes, 1u);

  // A silence of 15 s with nothing dropped is the sensor's: raised at the late sample.
  ASSERT_TRUE(bus.Deliver("cw2/pump_a/flow", Sample(120, 50.0)));
  EXPECT_TRUE(WaitFor([&] { return gap_raises() == 1; }, std::chrono::seconds(10)));
  rt.Stop();
  EXPECT_EQ(rt.counters().drop_holes, 1u);
}

TEST(ServiceOptionsTest, ErrorsNameFileLineAndKey) {
  const auto config = Load(
      "mqtt:\n"
      "  subscriptions:\n"
      "    - topic: \"brackwater/{area\"\n"
      "      channel: \"{area}\"\n"
      "    - topic: \"cmd\"\n"
      "      channel: \"c.x\"\n"
      "  command_topic: cmd\n");
  ASSERT_TRUE(config);
  const core::Result<ServiceOptions> r = BuildServiceOptions(*config, "plant.yaml", std::nullopt);
  ASSERT_FALSE(r.ok());
  EXPECT_NE(r.status().message().find("plant.yaml:3:7: mqtt.subscriptions[0]: topic pattern "
                                      "'brackwater/{area'"),
            std::string::npos)
      << r.status().message();
  EXPECT_NE(r.status().message().find("plant.yaml:5:7: mqtt.subscriptions[1].topic: is the "
                                      "command topic"),
            std::string::npos)
      << r.status().message();
}

TEST(ServiceOptionsTest, MetricsListenIsCheckedAndNamesTheKey) {
  std::string text = kConfig;
  text += "  metrics_listen: \"localhost:9464\"\n";
  auto config = Load(text);
  ASSERT_TRUE(config);
  core::Result<ServiceOptions> r = BuildServiceOptions(*config, "plant.yaml", std::nullopt);
  ASSERT_FALSE(r.ok());
  EXPECT_NE(r.status().message().find("plant.yaml: daemon.metrics_listen: 'localhost:9464': host "
                                      "must be an IPv4 address"),
            std::string::npos)
      << r.status().message();

  text = std::string(kConfig) + "  metrics_listen: \"127.0.0.1:9464\"\n";
  config = Load(text);
  ASSERT_TRUE(config);
  r = BuildServiceOptions(*config, "plant.yaml", std::nullopt);
  ASSERT_TRUE(r.ok()) << r.status().message();
  ASSERT_TRUE(r->metrics_listen.has_value());
  EXPECT_EQ(r->metrics_listen->host, "127.0.0.1");
  EXPECT_EQ(r->metrics_listen->port, 9464);
  EXPECT_FALSE(ParseListenAddress("127.0.0.1:65536").ok());
  EXPECT_FALSE(ParseListenAddress("127.0.0.1").ok());
}

TEST(ServiceOptionsTest, BrokerFlagOverridesHostAndPort) {
  const auto config = Load("mqtt:\n  subscriptions: [{topic: \"a/{x}\", channel: \"{x}\"}]\n");
  ASSERT_TRUE(config);
  const auto r = BuildServiceOptions(*config, "f", std::string("broker.cw2:1884"));
  ASSERT_TRUE(r.ok()) << r.status().message();
  EXPECT_EQ(r->client.host, "broker.cw2");
  EXPECT_EQ(r->client.port, 1884);
  ASSERT_TRUE(r->client.will.has_value());
  EXPECT_EQ(r->client.will->topic, "nightjar/status");
  EXPECT_TRUE(r->client.will->retain);

  std::string host;
  int port = 1883;
  EXPECT_TRUE(ParseBrokerAddress("[::1]:1885", &host, &port).ok());
  EXPECT_EQ(host, "::1");
  EXPECT_EQ(port, 1885);
  EXPECT_TRUE(ParseBrokerAddress("localhost", &host, &port).ok());
  EXPECT_EQ(port, 1885);  // unchanged without a port
  EXPECT_EQ(ParseBrokerAddress("h:0", &host, &port).message(),
            "'h:0': port must be a number in 1..65535");
  EXPECT_FALSE(ParseBrokerAddress(":1883", &host, &port).ok());
}

TEST(ServiceOptionsTest, UnreadablePasswordFileIsAnError) {
  const auto config = Load(
      "mqtt:\n  username: nj\n  password_file: /nonexistent/nightjar-password\n"
      "  subscriptions: [{topic: \"a/{x}\", channel: \"{x}\"}]\n");
  ASSERT_TRUE(config);
  const auto r = BuildServiceOptions(*config, "f.yaml", std::nullopt);
  ASSERT_FALSE(r.ok());
  EXPECT_NE(r.status().message().find("mqtt.password_file: cannot read "
                                      "'/nonexistent/nightjar-password'"),
            std::string::npos)
      << r.status().message();
}

}  // namespace
}  // namespace nightjar::service
