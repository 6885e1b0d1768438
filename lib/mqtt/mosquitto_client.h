// MosquittoClient: the MessageBus over a real MQTT 3.1.1 or 5 broker, built on libmosquitto.
//
// Connecting: Start() begins an asynchronous connect and returns; the process keeps
// running while the broker is down or unreachable. Every lost connection and every failed
// or refused attempt is retried, forever, with exponential backoff and jitter
// (internal/backoff.h): after n failures in a row the client waits a uniformly random time
// in [base/2, base), base = min(reconnect_max_s, reconnect_min_s * 2^(n-1)); an accepted
// CONNACK resets n to 0.
// After each connect the client subscribes again to every filter, publishes the announce
// message if set, then sends the outbox in order.
//
// Why not mosquitto_loop_start() with mosquitto_reconnect_delay_set(): its loop
// (mosquitto_loop_forever in libmosquitto 2.0) waits whole seconds growing with the
// square of the attempt count, has no jitter (every daemon on a site would reconnect in
// lock step after a broker restart), reconnects with a blocking connect, and returns for
// good, ending its thread, after errors it deems fatal, among them a failed DNS lookup
// (the broker's host is down) and, over MQTT 5, a refused CONNACK (a broker restarted
// before its password file was restored): the daemon would never reconnect. So this
// client runs
// its own network thread: it calls mosquitto_loop() (which does the socket I/O,
// keepalives and QoS retries) and, when the connection is gone, waits out the backoff on
// a condition variable (so Stop() is prompt) and calls mosquitto_reconnect_async().
// libmosquitto is told with mosquitto_threaded_set() that other threads call it.
//
// Outbox: a QoS >= 1 Publish() while disconnected goes into a bounded outbox
// (outbox_capacity; when full the oldest is dropped and counted) and is sent, in order,
// after the next connect. Messages already handed to libmosquitto when a connection drops
// are kept and re-sent by libmosquitto itself on reconnect, ahead of the outbox, so the
// order of publishes is kept across a reconnect. QoS 0 publishes while disconnected are
// dropped and counted (QoS 0 promises nothing).
//
// Latency: the socket has TCP_NODELAY (MOSQ_OPT_TCP_NODELAY), so a small publish is sent
// at once rather than held by Nagle's algorithm until the broker's delayed ACK. The broker
// should do the same towards its subscribers (mosquitto: `set_tcp_nodelay true`).
//
// Batches: the batch-end handler (message_bus.h) runs after each mosquitto_loop() call
// that passed messages to the message handler. One call can read many packets: while
// the MQTT ingest bench drains a burst of 10 000 channels, batches averaged ~700 messages.
//
// Retained messages: with skip_retained (the default) messages the broker marks retained
// — stored values it replays when a subscription is made — are counted and not passed
// to the handler: a retained sample is an old value that would get a new arrival time.
//
// Last will: set `will` to have the broker publish it when the connection ends without a
// DISCONNECT (crash, kill, network loss past 1.5 keepalives). Stop() disconnects cleanly,
// so the will is not published then; pair it with `announce` (published on every
// connect, e.g. a retained "online" on the will's topic) so the status topic stays true.
//
// MQTT 5: protocol kV5 speaks MQTT 5 with the same behaviour. A persistent session
// (clean_session false) needs a session expiry property on CONNECT, which libmosquitto's
// asynchronous connect cannot send, so kV5 requires clean_session true.
//
// SIGPIPE: libmosquitto writes to its socket with write(), and mosquitto_new() (called by
// Create()) sets SIGPIPE to SIG_IGN for the whole process so that a write to a dropped
// connection returns EPIPE instead of killing the process. The daemon must not count on
// SIGPIPE.
//
// Library lifetime: libmosquitto wants mosquitto_lib_init() before first use and
// mosquitto_lib_cleanup() after last. Create() initialises it once per process through a
// function-local static (C++ makes its first initialisation thread-safe); the static's
// destructor cleans up at process exit. So no MosquittoClient may outlive main().
//
// Thread-safety: as MessageBus says. Every public method is thread-safe, except that the
// Set*Handler() calls must come before Start() and the destructor must not run on the
// network thread (from a handler). Handlers run on the network thread.
//
// Ownership: Create() returns a unique_ptr the caller owns; the client owns its
// libmosquitto handle and its thread, and the destructor stops and frees both.
#pragma once

#include <chrono>
#include <condition_variable>
#include <cstddef>
#include <cstdint>
#include <map>
#include <memory>
#include <mutex>
#include <optional>
#include <random>
#include <string>
#include <string_view>
#include <thread>
#include <vector>

#include "core/status.h"
#include "mqtt/internal/outbox.h"
#include "mqtt/message_bus.h"

struct mosquitto;          // libmosquitto's client handle
struct mosquitto_message;  // kept out of this header

namespace nightjar::mqtt {

enum class MqttProtocol { kV311, kV5 };
// "3.1.1", "5".
const char* MqttProtocolName(MqttProtocol protocol);

// A message the client sends by itself: the last will, the announce message.
struct MqttMessage {
  std::string topic;  // no wildcards
  std::string payload;
  int qos = 1;         // 0, 1 or 2
  bool retain = true;  // a status topic should hold its latest value for late subscribers
};

struct ClientOptions {
  // Broker host name or address. Default "127.0.0.1".
  std::string host = "127.0.0.1";
  // Broker TCP port, 1..65535. Default 1883.
  int port = 1883;
  // MQTT client identifier; empty lets libmosquitto pick a random one (clean_session
  // only). A broker disconnects an older connection using the same id. Default empty.
  std::string client_id;
  // Keepalive interval in seconds, 5..65535 (libmosquitto's minimum is 5). A dead
  // connection is noticed within about 1.5 times this. Default 30.
  int keepalive_s = 30;
  // Start every connection with a fresh session. false keeps subscriptions and QoS >= 1
  // messages queued at the broker while disconnected (needs client_id; kV311 only).
  // Default true.
  bool clean_session = true;
  // MQTT protocol version. Default kV311.
  MqttProtocol protocol = MqttProtocol::kV311;
  // Credentials, sent in the clear unless the broker link is otherwise protected.
  // password needs username. Default none.
  std::optional<std::string> username;
  std::optional<std::string> password;
  // Last will, published by the broker if the connection ends without a DISCONNECT.
  // Default none.
  std::optional<MqttMessage> will;
  // Published after every successful connect, before the outbox. Default none.
  std::optional<MqttMessage> announce;
  // Reconnect backoff in seconds: first delay and cap, 0 < min <= max <= 3600.
  // Defaults 1 and 60.
  double reconnect_min_s = 1.0;
  double reconnect_max_s = 60.0;
  // Most QoS >= 1 publishes kept while disconnected; 0 keeps none. Default 10000.
  std::size_t outbox_capacity = 10'000;
  // Do not pass retained messages to the message handler (they are counted). Default true.
  bool skip_retained = true;
  // How long Stop() waits for the outbox and unacknowledged publishes while connected,
  // seconds, 0..60. Default 2.
  double stop_drain_s = 2.0;
};

// OK, or InvalidArgument naming the field, e.g. "port: must be in 1..65535, got 0".
core::Status ValidateClientOptions(const ClientOptions& options);

class MosquittoClient final : public MessageBus {
 public:
  // Validates `options` and sets up the libmosquitto handle (identity, credentials, will,
  // protocol); no network traffic yet. InvalidArgument naming the field for bad options.
  static core::Result<std::unique_ptr<MosquittoClient>> Create(ClientOptions options);

  ~MosquittoClient() override;
  MosquittoClient(const MosquittoClient&) = delete;
  MosquittoClient& operator=(const MosquittoClient&) = delete;

  void SetMessageHandler(MessageHandler handler) override;
  void SetBatchEndHandler(BatchEndHandler handler) override;
  void SetConnectionHandler(ConnectionHandler handler) override;
  core::Status Start() override;
  void Stop() override;
  core::Status Publish(std::string_view topic, std::string_view payload, int qos,
                       bool retain) override;
  core::Status Subscribe(std::string_view filter, int qos) override;
  core::Status Unsubscribe(std::string_view filter) override;
  bool IsConnected() const override;
  BusStats stats() const override;

  const ClientOptions& options() const { return options_; }

 private:
  struct Subscription {
    std::string filter;
    int qos = 0;
  };

  explicit MosquittoClient(ClientOptions options);
  core::Status Setup();

  // The network thread; `connect_failed` if Start()'s first attempt failed at once.
  void Run(bool connect_failed);
  // Waits out the backoff after `failures` failures in a row; false if Stop() came first.
  bool WaitBackoff(int failures);
  // Sends the outbox while connected (network thread).
  void FlushOutbox();
  // Calls the batch-end handler if messages were handled since the last call (network
  // thread).
  void EndBatch();
  // Publishes one message through libmosquitto; mutex_ held.
  core::Status SendLocked(const std::string& topic, std::string_view payload, int qos, bool retain);
  std::string BrokerName() const;

  // libmosquitto callbacks (network thread, libmosquitto's callback lock held).
  static void OnConnect(mosquitto* mosq, void* self, int rc);
  static void OnDisconnect(mosquitto* mosq, void* self, int rc);
  static void OnPublish(mosquitto* mosq, void* self, int mid);
  static void OnMessage(mosquitto* mosq, void* self, const mosquitto_message* message);
  static void OnSubscribe(mosquitto* mosq, void* self, int mid, int qos_count,
                          const int* granted_qos);

  const ClientOptions options_;
  mosquitto* mosq_ = nullptr;

  // Set before Start(), read-only afterwards (the thread start orders them).
  MessageHandler message_handler_;
  BatchEndHandler batch_end_handler_;
  ConnectionHandler connection_handler_;

  std::thread thread_;
  // Touched by the network thread only.
  int failures_in_row_ = 0;
  std::size_t batch_messages_ = 0;  // messages handled since the last batch end
  bool attempt_connected_ = false;  // the current attempt got an accepted CONNACK
  bool attempt_refused_ = false;    // the current attempt got a refusing CONNACK
  std::mt19937_64 jitter_rng_;

  // Held around starting a reconnect and around setting stopping_, so that no reconnect
  // starts once Stop() has begun. Taken before mutex_.
  std::mutex connect_mutex_;

  mutable std::mutex mutex_;
  std::condition_variable wake_;  // backoff waits and Stop()'s drain wait
  // Guarded by mutex_:
  bool started_ = false;
  bool stopping_ = false;
  bool stopped_ = false;
  bool connected_ = false;
  std::chrono::steady_clock::time_point stop_deadline_;
  std::vector<Subscription> subscriptions_;
  std::map<int, std::string> pending_subscribes_;  // message id -> filter, until SUBACK
  internal::Outbox outbox_;
  BusStats stats_;  // counters; connected, outbox_size, outbox_dropped filled in by stats()
};

}  // namespace nightjar::mqtt
