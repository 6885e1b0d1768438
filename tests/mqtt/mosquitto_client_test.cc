// MosquittoClient against a real mosquitto broker, checked from outside by Debian's
// mosquitto_pub / mosquitto_sub (see broker_fixture.h).
#include "mqtt/mosquitto_client.h"

#include <gtest/gtest.h>
#include <poll.h>
#include <sys/wait.h>
#include <unistd.h>

#include <array>
#include <atomic>
#include <cstdlib>
#include <map>
#include <mutex>
#include <string>
#include <vector>

#include "broker_fixture.h"
#include "mqtt/sample_intake.h"

namespace nightjar::mqtt {
namespace {

using nightjar::testing::RunCommand;
using nightjar::testing::TestBroker;
using nightjar::testing::WaitFor;
using nightjar::testing::Witness;
using std::chrono::milliseconds;

constexpr const char* kAlertTopic = "brackwater/cw2/nightjar/alerts";
constexpr const char* kStatusTopic = "brackwater/cw2/nightjar/status";

ClientOptions FastOptions(const TestBroker& broker, const std::string& client_id) {
  ClientOptions o;
  o.host = "127.0.0.1";
  o.port = broker.port();
  o.client_id = client_id;
  o.keepalive_s = 5;
  o.reconnect_min_s = 0.05;
  o.reconnect_max_s = 0.2;
  o.stop_drain_s = 1.0;
  return o;
}

std::unique_ptr<MosquittoClient> MakeClient(ClientOptions options) {
  core::Result<std::unique_ptr<MosquittoClient>> client =
      MosquittoClient::Create(std::move(options));
  EXPECT_TRUE(client.ok()) << client.status().message();
  return client.ok() ? std::move(client).value() : nullptr;
}

// Collects what a handler receives on the network thread.
class Inbox {
 public:
  void Add(std::string a, std::string b) {
    std::lock_guard lock(mutex_);
    items_.emplace_back(std::move(a), std::move(b));
  }
  std::vector<std::pair<std::string, std::string>> items() const {
    std::lock_guard lock(mutex_);
    return items_;
  }
  std::size_t size() const {
    std::lock_guard lock(mutex_);
    return items_.size();
  }

 private:
  mutable std::mutex mutex_;
  std::vector<std::pair<std::string, std::string>> items_;
};

// (a) Subscribed through a mapped topic pattern, 100 numbers published by mosquitto_pub
// on four topics all arrive as samples with the right channel names, in order per topic;
// a retained value the broker replays on subscribing is skipped.
TEST(MosquittoClientTest, ReceivesMappedSamplesFromMosquittoPub) {
  auto broker = TestBroker::Start();
  ASSERT_TRUE(broker.ok()) << broker.status().message();
  TestBroker& b = **broker;
  const std::string port = std::to_string(b.port());
  ASSERT_TRUE(RunCommand({"mosquitto_pub", "-h", "127.0.0.1", "-p", port, "-q", "1", "-r", "-t",
                          "brackwater/cw2/pump_a/flow", "-m", "999"},
                         b.dir().File("pub-retained.out"))
                  .ok());

  Inbox samples;
  IntakeOptions intake_options;
  intake_options.rules.push_back(IntakeRule{.topic = "brackwater/{area}/{asset}/{signal}",
                                            .channel = "{area}.{asset}.{signal}",
                                            .payload = {},
                                            .qos = 1});
  auto intake = SampleIntake::Create(
      intake_options, [] { return core::TimestampUs{0}; },
      [&samples](std::string_view channel, core::TimestampUs, double value) {
        samples.Add(std::string(channel), std::to_string(static_cast<int>(value)));
      },
      {});
  ASSERT_TRUE(intake.ok()) << intake.status().message();
  auto client = MakeClient(FastOptions(b, "cw2-nightjar-in"));
  ASSERT_TRUE((*intake)->Attach(*client).ok());
  // Batch ends, and how many samples had arrived at the latest one (network thread).
  std::atomic<std::size_t> batch_ends{0};
  std::atomic<std::size_t> samples_at_batch_end{0};
  client->SetBatchEndHandler([&] {
    ++batch_ends;
    samples_at_batch_end.store(samples.size());
  });
  ASSERT_TRUE(client->Start().ok());
  ASSERT_TRUE(WaitFor([&] { return client->stats().subscribe_acks >= 1; }))
      << client->stats().last_error;

  const std::vector<std::string> topics = {
      "brackwater/cw2/pump_a/flow", "brackwater/cw2/pump_a/pressure", "brackwater/cw2/pump_b/flow",
      "brackwater/cw2/pump_b/motor_current"};
  for (std::size_t t = 0; t < topics.size(); ++t) {
    std::string lines;
    for (int i = 0; i < 25; ++i) lines += std::to_string(static_cast<int>(t) * 1000 + i) + "\n";
    const std::string input = b.dir().File("lines-" + std::to_string(t) + ".txt");
    nightjar::testing::WriteFile(input, lines);
    ASSERT_TRUE(RunCommand({"mosquitto_pub", "-h", "127.0.0.1", "-p", port, "-q", "1", "-t",
                            topics[t], "-l"},
                           b.dir().File("pub-" + std::to_string(t) + ".out"), input)
                    .ok());
  }
  ASSERT_TRUE(WaitFor([&] { return samples.size() >= 100; })) << samples.size() << " samples";

  std::map<std::string, std::vector<std::string>> by_channel;
  for (const auto& [channel, value] : samples.items()) by_channel[channel].push_back(value);
  ASSERT_EQ(samples.size(), 100u);
  const std::vector<std::string> channels = {"cw2.pump_a.flow", "cw2.pump_a.pressure",
                                             "cw2.pump_b.flow", "cw2.pump_b.motor_current"};
  for (std::size_t t = 0; t < channels.size(); ++t) {
    std::vector<std::string> want;
    want.reserve(25);
    for (int i = 0; i < 25; ++i) want.push_back(std::to_string(static_cast<int>(t) * 1000 + i));
    EXPECT_EQ(by_channel[channels[t]], want) << channels[t];
  }
  const BusStats stats = client->stats();
  EXPECT_EQ(stats.messages_in, 100u);
  EXPECT_EQ(stats.retained_skipped, 1u);  // the 999 stored before we subscribed
  EXPECT_EQ((*intake)->stats().samples, 100u);
  // The last message is followed by a batch end, and no batch end comes without one.
  EXPECT_TRUE(WaitFor([&] { return samples_at_batch_end.load() == 100; }))
      << samples_at_batch_end.load();
  EXPECT_GE(batch_ends.load(), 1u);
  EXPECT_LE(batch_ends.load(), 100u);
  client->Stop();
}

// (b) 50 QoS 1 publishes reach an independent mosquitto_sub exactly, in order.
TEST(MosquittoClientTest, PublishesReachMosquittoSubInOrder) {
  auto broker = TestBroker::Start();
  ASSERT_TRUE(broker.ok()) << broker.status().message();
  auto witness = Witness::Start(**broker, kAlertTopic, 50);
  ASSERT_TRUE(witness.ok()) << witness.status().message();
  ASSERT_TRUE((*witness)->WaitSubscribed()) << (*witness)->output();

  auto client = MakeClient(FastOptions(**broker, "cw2-nightjar-out"));
  ASSERT_TRUE(client->Start().ok());
  ASSERT_TRUE(WaitFor([&] { return client->IsConnected(); })) << client->stats().last_error;
  std::vector<std::string> want;
  for (int i = 0; i < 50; ++i) {
    const std::string payload = R"({"channel":"cw2.pump_a.flow","seq":)" + std::to_string(i) + "}";
    ASSERT_TRUE(client->Publish(kAlertTopic, payload, 1, false).ok());
    want.push_back(std::string("0 1 ") + kAlertTopic + " " + payload);
  }
  ASSERT_TRUE((*witness)->WaitExit()) << (*witness)->output();
  EXPECT_EQ((*witness)->Messages(), want);
  ASSERT_TRUE(WaitFor([&] { return client->stats().publish_completed == 50; }));
  EXPECT_EQ(client->stats().published, 50u);
  client->Stop();
  // A clean stop says DISCONNECT: the broker logs a disconnect, not a closed connection.
  EXPECT_TRUE(WaitFor([&] {
    return (*broker)->log().find("Client cw2-nightjar-out disconnected.") != std::string::npos;
  })) << (*broker)->log();
}

// Runs in a forked child: a client with a will and a retained "online" announce; tells
// the parent when the announce is acknowledged, then waits to be killed.
[[noreturn]] void RunWillChild(int port, int ready_fd) {
  ClientOptions o;
  o.port = port;
  o.client_id = "cw2-nightjar-will";
  o.keepalive_s = 5;
  o.will = MqttMessage{.topic = kStatusTopic, .payload = "offline", .qos = 1, .retain = true};
  o.announce = MqttMessage{.topic = kStatusTopic, .payload = "online", .qos = 1, .retain = true};
  auto client = MosquittoClient::Create(o);
  if (!client.ok() || !(*client)->Start().ok()) ::_exit(2);
  if (!WaitFor([&] { return (*client)->stats().publish_completed >= 1; })) ::_exit(3);
  if (::write(ready_fd, "R", 1) != 1) ::_exit(4);
  while (true) ::pause();  // until SIGKILL: no DISCONNECT is ever sent
}

// (c) A late subscriber sees the retained status; killing the client's process (its
// socket closed by the kernel, no DISCONNECT) makes the broker publish the will.
TEST(MosquittoClientTest, RetainedStatusAndLastWill) {
  auto broker = TestBroker::Start();
  ASSERT_TRUE(broker.ok()) << broker.status().message();
  std::array<int, 2> pipe_fds{};
  ASSERT_EQ(::pipe(pipe_fds.data()), 0);
  const pid_t child = ::fork();
  ASSERT_GE(child, 0);
  if (child == 0) {
    ::close(pipe_fds[0]);
    RunWillChild((*broker)->port(), pipe_fds[1]);
  }
  ::close(pipe_fds[1]);
  struct ChildGuard {
    pid_t pid;
    ~ChildGuard() {
      if (pid > 0) {
        ::kill(pid, SIGKILL);
        ::waitpid(pid, nullptr, 0);
      }
    }
  } guard{child};
  pollfd ready{.fd = pipe_fds[0], .events = POLLIN, .revents = 0};
  ASSERT_EQ(::poll(&ready, 1, 10000), 1) << "client child never reported ready";
  char byte = 0;
  ASSERT_EQ(::read(pipe_fds[0], &byte, 1), 1);
  ::close(pipe_fds[0]);

  // Started after the status was set: gets it as a retained message.
  auto watcher = Witness::Start(**broker, kStatusTopic, 2);
  ASSERT_TRUE(watcher.ok());
  ASSERT_TRUE(WaitFor([&] { return (*watcher)->Messages().size() == 1; })) << (*watcher)->output();
  EXPECT_EQ((*watcher)->Messages()[0], std::string("1 1 ") + kStatusTopic + " online");

  ::kill(child, SIGKILL);
  ::waitpid(child, nullptr, 0);
  guard.pid = -1;
  ASSERT_TRUE((*watcher)->WaitExit()) << (*watcher)->output();
  const std::vector<std::string> seen = (*watcher)->Messages();
  ASSERT_EQ(seen.size(), 2u);
  EXPECT_EQ(seen[1].substr(2), std::string("1 ") + kStatusTopic + " offline");  // the will
  // The will was retained: a subscriber arriving now sees "offline".
  auto late = Witness::Start(**broker, kStatusTopic, 1);
  ASSERT_TRUE(late.ok());
  ASSERT_TRUE((*late)->WaitExit()) << (*late)->output();
  EXPECT_EQ((*late)->Messages(),
            std::vector<std::string>{std::string("1 1 ") + kStatusTopic + " offline"});
  // The broker saw the socket close without a DISCONNECT.
  EXPECT_NE((*broker)->log().find("Client cw2-nightjar-will closed its connection."),
            std::string::npos)
      << (*broker)->log();
}

// (d) Broker restart mid-stream: 20 QoS 1 publishes made while it is down wait in the
// outbox and reach mosquitto_sub in order after the reconnect; the subscription is made
// again. To know the witness listens before our client reconnects, the restarted broker
// first admits only the witness (password file) and lets our client in on a reload; our
// client meanwhile sees "not authorised" refusals and keeps retrying.
TEST(MosquittoClientTest, BrokerRestartFlushesOutboxInOrderAndResubscribes) {
  auto started = TestBroker::Start();
  ASSERT_TRUE(started.ok()) << started.status().message();
  TestBroker& b = **started;
  const std::string port = std::to_string(b.port());

  Inbox inbox;
  ClientOptions options = FastOptions(b, "cw2-nightjar-restart");
  options.username = "cw2-nightjar";
  options.password = "cw2-secret";
  auto client = MakeClient(options);
  client->SetMessageHandler([&inbox](std::string_view topic, std::string_view payload) {
    inbox.Add(std::string(topic), std::string(payload));
  });
  std::mutex changes_mutex;
  std::vector<bool> changes;
  client->SetConnectionHandler([&](bool up) {
    std::lock_guard lock(changes_mutex);
    changes.push_back(up);
  });
  ASSERT_TRUE(client->Subscribe("brackwater/cw2/+/flow", 1).ok());
  ASSERT_TRUE(client->Start().ok());
  ASSERT_TRUE(WaitFor([&] { return client->stats().subscribe_acks >= 1; }))
      << client->stats().last_error;
  for (int i = 0; i < 5; ++i)
    ASSERT_TRUE(client->Publish(kAlertTopic, "before " + std::to_string(i), 1, false).ok());
  ASSERT_TRUE(WaitFor([&] { return client->stats().publish_completed >= 5; }));

  b.Stop();
  ASSERT_TRUE(WaitFor([&] { return !client->IsConnected(); }));
  std::vector<std::string> want;
  for (int i = 0; i < 20; ++i) {
    const std::string payload = "while down " + std::to_string(i);
    ASSERT_TRUE(client->Publish(kAlertTopic, payload, 1, false).ok());
    want.push_back(std::string("0 1 ") + kAlertTopic + " " + payload);
  }
  EXPECT_EQ(client->stats().outbox_size, 20u);

  const std::string passwd = b.dir().File("passwd");
  ASSERT_TRUE(RunCommand({"mosquitto_passwd", "-c", "-b", passwd, "witness", "w-secret"},
                         b.dir().File("passwd.out"))
                  .ok());
  ::chmod(passwd.c_str(), 0644);
  ASSERT_TRUE(b.Restart("allow_anonymous false\npassword_file " + passwd + "\n").ok());
  auto witness = Witness::Start(b, kAlertTopic, 20, {"-u", "witness", "-P", "w-secret"});
  ASSERT_TRUE(witness.ok());
  ASSERT_TRUE((*witness)->WaitSubscribed()) << (*witness)->output();
  // Our client is refused meanwhile, says why, and keeps trying.
  ASSERT_TRUE(WaitFor([&] {
    return client->stats().last_error.find("not authorised") != std::string::npos;
  })) << client->stats().last_error;
  EXPECT_FALSE(client->IsConnected());

  ASSERT_TRUE(RunCommand({"mosquitto_passwd", "-b", passwd, "cw2-nightjar", "cw2-secret"},
                         b.dir().File("passwd.out"))
                  .ok());
  ::chmod(passwd.c_str(), 0644);
  b.Reload();
  ASSERT_TRUE(WaitFor([&] { return client->IsConnected(); }, milliseconds(10000)))
      << client->stats().last_error;
  ASSERT_TRUE((*witness)->WaitExit()) << (*witness)->output();
  EXPECT_EQ((*witness)->Messages(), want);

  // Subscribed again: a sample published now reaches our handler.
  ASSERT_TRUE(WaitFor([&] { return client->stats().subscribe_acks >= 2; }));
  ASSERT_TRUE(RunCommand({"mosquitto_pub", "-h", "127.0.0.1", "-p", port, "-u", "witness", "-P",
                          "w-secret", "-q", "1", "-t", "brackwater/cw2/pump_a/flow", "-m", "42.5"},
                         b.dir().File("pub.out"))
                  .ok());
  ASSERT_TRUE(WaitFor([&] { return inbox.size() == 1; }));
  EXPECT_EQ(inbox.items()[0],
            (std::pair<std::string, std::string>{"brackwater/cw2/pump_a/flow", "42.5"}));

  const BusStats stats = client->stats();
  EXPECT_EQ(stats.reconnects, 1u);
  EXPECT_EQ(stats.connects, 2u);
  EXPECT_GE(stats.connect_failures, 1u);
  EXPECT_EQ(stats.outbox_size, 0u);
  EXPECT_EQ(stats.outbox_dropped, 0u);
  client->Stop();
  std::lock_guard lock(changes_mutex);
  EXPECT_EQ(changes, (std::vector<bool>{true, false, true, false}));
}

// Start() returns while no broker listens; publishes wait in a bounded outbox (oldest
// dropped and counted) and go out once a broker appears on the port.
TEST(MosquittoClientTest, StartsWhileBrokerIsDownAndBoundsTheOutbox) {
  auto broker = TestBroker::Start();
  ASSERT_TRUE(broker.ok()) << broker.status().message();
  TestBroker& b = **broker;
  b.Stop();
  ClientOptions options = FastOptions(b, "cw2-nightjar-early");
  options.outbox_capacity = 5;
  auto client = MakeClient(options);
  ASSERT_TRUE(client->Start().ok());
  for (int i = 0; i < 8; ++i) {
    ASSERT_TRUE(client->Publish(kAlertTopic, "early " + std::to_string(i), 1, false).ok());
  }
  ASSERT_TRUE(WaitFor([&] { return client->stats().connect_failures >= 2; }));
  BusStats stats = client->stats();
  EXPECT_FALSE(stats.connected);
  EXPECT_EQ(stats.outbox_size, 5u);
  EXPECT_EQ(stats.outbox_dropped, 3u);
  EXPECT_NE(stats.last_error.find("connecting to 127.0.0.1:" + std::to_string(b.port())),
            std::string::npos)
      << stats.last_error;

  ASSERT_TRUE(b.Restart().ok());
  ASSERT_TRUE(WaitFor([&] { return client->stats().publish_completed == 5; }))
      << client->stats().last_error;
  stats = client->stats();
  EXPECT_TRUE(stats.connected);
  EXPECT_EQ(stats.connects, 1u);
  EXPECT_EQ(stats.reconnects, 0u);
  EXPECT_EQ(stats.outbox_size, 0u);
  client->Stop();
}

// A handler may publish (here: an echo), and a filter subscribed after the connect is
// sent at once.
TEST(MosquittoClientTest, HandlersMayPublishAndLateSubscribesApply) {
  auto broker = TestBroker::Start();
  ASSERT_TRUE(broker.ok()) << broker.status().message();
  auto witness = Witness::Start(**broker, kAlertTopic, 3);
  ASSERT_TRUE(witness.ok());
  ASSERT_TRUE((*witness)->WaitSubscribed()) << (*witness)->output();
  auto client = MakeClient(FastOptions(**broker, "cw2-nightjar-echo"));
  MosquittoClient* raw = client.get();
  client->SetMessageHandler([raw](std::string_view topic, std::string_view payload) {
    const core::Status s =
        raw->Publish(kAlertTopic, std::string(topic) + " " + std::string(payload), 1, false);
    EXPECT_TRUE(s.ok()) << s.message();
  });
  ASSERT_TRUE(client->Start().ok());
  ASSERT_TRUE(WaitFor([&] { return client->IsConnected(); })) << client->stats().last_error;
  ASSERT_TRUE(client->Subscribe("brackwater/cw2/+/flow", 1).ok());
  ASSERT_TRUE(WaitFor([&] { return client->stats().subscribe_acks >= 1; }));
  const std::string port = std::to_string((*broker)->port());
  for (const char* value : {"1.5", "2.5", "3.5"}) {
    ASSERT_TRUE(RunCommand({"mosquitto_pub", "-h", "127.0.0.1", "-p", port, "-q", "1", "-t",
                            "brackwater/cw2/pump_a/flow", "-m", value},
                           (*broker)->dir().File("pub.out"))
                    .ok());
  }
  ASSERT_TRUE((*witness)->WaitExit()) << (*witness)->output();
  const std::string prefix = std::string("0 1 ") + kAlertTopic + " brackwater/cw2/pump_a/flow ";
  EXPECT_EQ((*witness)->Messages(),
            (std::vector<std::string>{prefix + "1.5", prefix + "2.5", prefix + "3.5"}));
  client->Stop();
}

// The same round trip over MQTT 5.
TEST(MosquittoClientTest, SpeaksMqtt5) {
  auto broker = TestBroker::Start();
  ASSERT_TRUE(broker.ok()) << broker.status().message();
  auto witness = Witness::Start(**broker, kAlertTopic, 1, {"-V", "5"});
  ASSERT_TRUE(witness.ok());
  ASSERT_TRUE((*witness)->WaitSubscribed()) << (*witness)->output();
  ClientOptions options = FastOptions(**broker, "cw2-nightjar-v5");
  options.protocol = MqttProtocol::kV5;
  auto client = MakeClient(options);
  Inbox inbox;
  client->SetMessageHandler([&inbox](std::string_view topic, std::string_view payload) {
    inbox.Add(std::string(topic), std::string(payload));
  });
  ASSERT_TRUE(client->Subscribe("brackwater/cw2/+/flow", 1).ok());
  ASSERT_TRUE(client->Start().ok());
  ASSERT_TRUE(WaitFor([&] { return client->stats().subscribe_acks >= 1; }))
      << client->stats().last_error;
  ASSERT_TRUE(client->Publish(kAlertTopic, "v5 alert", 1, false).ok());
  ASSERT_TRUE((*witness)->WaitExit()) << (*witness)->output();
  EXPECT_EQ((*witness)->Messages(),
            std::vector<std::string>{std::string("0 1 ") + kAlertTopic + " v5 alert"});
  ASSERT_TRUE(RunCommand({"mosquitto_pub", "-V", "5", "-h", "127.0.0.1", "-p",
                          std::to_string((*broker)->port()), "-q", "1", "-t",
                          "brackwater/cw2/pump_b/flow", "-m", "7.25"},
                         (*broker)->dir().File("pub.out"))
                  .ok());
  ASSERT_TRUE(WaitFor([&] { return inbox.size() == 1; }));
  EXPECT_EQ(inbox.items()[0].second, "7.25");
  client->Stop();
}

}  // namespace
}  // namespace nightjar::mqtt
