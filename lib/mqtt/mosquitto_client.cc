#include "mqtt/mosquitto_client.h"

#include <mosquitto.h>

#include <algorithm>
#include <cassert>
#include <chrono>
#include <cmath>
#include <utility>

#include "mqtt/internal/backoff.h"
#include "mqtt/internal/mosquitto_status.h"
#include "mqtt/internal/text.h"

namespace nightjar::mqtt {
namespace {

constexpr std::size_t kMaxTopicBytes = 65535;
constexpr std::size_t kMaxPayloadBytes = 268'435'455;  // MQTT's remaining-length limit
constexpr std::size_t kMaxWillPayloadBytes = 65535;    // two-byte length in CONNECT
// mosquitto_loop() timeout: how long the network thread may sit in select() with nothing
// to do. Publishes from other threads wake it at once; this bounds only the outbox flush
// right after a connect and the reaction to Stop() when the socket is idle.
constexpr int kLoopTimeoutMs = 100;
// How long the network thread keeps going after Stop() to get the DISCONNECT out.
constexpr std::chrono::milliseconds kStopTimeout{1000};

// libmosquitto's process-wide set-up. The only static object in nightjar: the library
// requires it, and a function-local static makes the first initialisation thread-safe.
class LibraryLifetime {
 public:
  LibraryLifetime() { mosquitto_lib_init(); }
  ~LibraryLifetime() { mosquitto_lib_cleanup(); }
  LibraryLifetime(const LibraryLifetime&) = delete;
  LibraryLifetime& operator=(const LibraryLifetime&) = delete;
};

void EnsureLibraryInitialised() { static const LibraryLifetime library; }

bool ValidUtf8(std::string_view text) {
  return mosquitto_validate_utf8(text.data(), static_cast<int>(text.size())) == MOSQ_ERR_SUCCESS;
}

// Why `topic` cannot be published to, or nullptr.
const char* BadPublishTopic(std::string_view topic) {
  if (topic.empty()) return "empty topic";
  if (topic.size() > kMaxTopicBytes) return "longer than 65535 bytes";
  if (topic.find_first_of("+#") != std::string_view::npos) {
    return "wildcards + and # are not allowed in a published topic";
  }
  if (!ValidUtf8(topic)) return "not valid UTF-8, or holds a control character";
  return nullptr;
}

// Why `filter` is not a subscription filter, or nullptr.
const char* BadFilter(std::string_view filter) {
  if (filter.empty()) return "empty filter";
  if (filter.size() > kMaxTopicBytes) return "longer than 65535 bytes";
  if (!ValidUtf8(filter)) return "not valid UTF-8, or holds a control character";
  if (mosquitto_sub_topic_check2(filter.data(), filter.size()) != MOSQ_ERR_SUCCESS) {
    return "'+' and '#' must each be a whole level, and '#' the last";
  }
  return nullptr;
}

core::Status CheckMessage(const MqttMessage& message, std::string_view name,
                          std::size_t max_payload) {
  if (const char* why = BadPublishTopic(message.topic)) {
    return core::Status::InvalidArgument(std::string(name) + ".topic '" +
                                         internal::Printable(message.topic, 200) + "': " + why);
  }
  if (message.qos < 0 || message.qos > 2) {
    return core::Status::InvalidArgument(std::string(name) + ".qos: must be 0, 1 or 2, got " +
                                         std::to_string(message.qos));
  }
  if (message.payload.size() > max_payload) {
    return core::Status::InvalidArgument(std::string(name) + ".payload: longer than " +
                                         std::to_string(max_payload) + " bytes");
  }
  return core::Status::Ok();
}

bool InRange(double value, double low, double high) {
  return std::isfinite(value) && value >= low && value <= high;
}

}  // namespace

const char* MqttProtocolName(MqttProtocol protocol) {
  return protocol == MqttProtocol::kV5 ? "5" : "3.1.1";
}

core::Status ValidateClientOptions(const ClientOptions& o) {
  using core::Status;
  if (o.host.empty()) return Status::InvalidArgument("host: empty");
  if (o.host.find('\0') != std::string::npos) return Status::InvalidArgument("host: holds NUL");
  if (o.port < 1 || o.port > 65535) {
    return Status::InvalidArgument("port: must be in 1..65535, got " + std::to_string(o.port));
  }
  if (o.client_id.size() > kMaxTopicBytes || !ValidUtf8(o.client_id)) {
    return Status::InvalidArgument("client_id: must be valid UTF-8 of at most 65535 bytes");
  }
  if (o.client_id.empty() && !o.clean_session) {
    return Status::InvalidArgument("client_id: needed when clean_session is false");
  }
  if (o.keepalive_s < 5 || o.keepalive_s > 65535) {
    return Status::InvalidArgument("keepalive_s: must be in 5..65535, got " +
                                   std::to_string(o.keepalive_s));
  }
  if (o.protocol == MqttProtocol::kV5 && !o.clean_session) {
    return Status::InvalidArgument(
        "clean_session: must be true with protocol 5 (a persistent MQTT 5 session needs a "
        "session expiry on CONNECT, which the asynchronous connect cannot send); use 3.1.1");
  }
  if (o.password && !o.username) return Status::InvalidArgument("password: needs a username");
  if (o.username && !ValidUtf8(*o.username)) {
    return Status::InvalidArgument("username: must be valid UTF-8");
  }
  if (o.will) {
    if (Status s = CheckMessage(*o.will, "will", kMaxWillPayloadBytes); !s.ok()) return s;
  }
  if (o.announce) {
    if (Status s = CheckMessage(*o.announce, "announce", kMaxPayloadBytes); !s.ok()) return s;
  }
  if (!(InRange(o.reconnect_min_s, 0.0, 3600.0) && o.reconnect_min_s > 0.0)) {
    return Status::InvalidArgument("reconnect_min_s: must be in (0, 3600], got " +
                                   std::to_string(o.reconnect_min_s));
  }
  if (!InRange(o.reconnect_max_s, o.reconnect_min_s, 3600.0)) {
    return Status::InvalidArgument("reconnect_max_s: must be in [reconnect_min_s, 3600], got " +
                                   std::to_string(o.reconnect_max_s));
  }
  if (!InRange(o.stop_drain_s, 0.0, 60.0)) {
    return Status::InvalidArgument("stop_drain_s: must be in [0, 60], got " +
                                   std::to_string(o.stop_drain_s));
  }
  return Status::Ok();
}

core::Result<std::unique_ptr<MosquittoClient>> MosquittoClient::Create(ClientOptions options) {
  if (core::Status s = ValidateClientOptions(options); !s.ok()) return s;
  EnsureLibraryInitialised();
  std::unique_ptr<MosquittoClient> client(new MosquittoClient(std::move(options)));
  if (core::Status s = client->Setup(); !s.ok()) return s;
  return client;
}

MosquittoClient::MosquittoClient(ClientOptions options)
    : options_(std::move(options)),
      jitter_rng_(std::random_device{}()),
      outbox_(options_.outbox_capacity) {}

core::Status MosquittoClient::Setup() {
  const char* id = options_.client_id.empty() ? nullptr : options_.client_id.c_str();
  mosq_ = mosquitto_new(id, options_.clean_session, this);
  if (mosq_ == nullptr) {
    return core::Status::Internal("cannot create the MQTT client handle (out of memory?)");
  }
  // Publish() and Subscribe() are called from threads other than the network thread.
  if (core::Status s =
          internal::MosquittoStatus(mosquitto_threaded_set(mosq_, true), "mosquitto_threaded_set");
      !s.ok()) {
    return s;
  }
  const int version =
      options_.protocol == MqttProtocol::kV5 ? MQTT_PROTOCOL_V5 : MQTT_PROTOCOL_V311;
  if (core::Status s = internal::MosquittoStatus(
          mosquitto_int_option(mosq_, MOSQ_OPT_PROTOCOL_VERSION, version), "protocol");
      !s.ok()) {
    return s;
  }
  // Alerts are small messages that must go out at once: with Nagle's algorithm a publish
  // right after another one (an alert after the state, a PUBACK) waits for the peer's
  // delayed ACK, 40 ms on Linux.
  if (core::Status s = internal::MosquittoStatus(
          mosquitto_int_option(mosq_, MOSQ_OPT_TCP_NODELAY, 1), "tcp_nodelay");
      !s.ok()) {
    return s;
  }
  if (options_.username) {
    const char* password = options_.password ? options_.password->c_str() : nullptr;
    if (core::Status s = internal::MosquittoStatus(
            mosquitto_username_pw_set(mosq_, options_.username->c_str(), password), "username");
        !s.ok()) {
      return s;
    }
  }
  if (options_.will) {
    const MqttMessage& will = *options_.will;
    if (core::Status s = internal::MosquittoStatus(
            mosquitto_will_set(mosq_, will.topic.c_str(), static_cast<int>(will.payload.size()),
                               will.payload.data(), will.qos, will.retain),
            "will");
        !s.ok()) {
      return s;
    }
  }
  mosquitto_connect_callback_set(mosq_, &MosquittoClient::OnConnect);
  mosquitto_disconnect_callback_set(mosq_, &MosquittoClient::OnDisconnect);
  mosquitto_publish_callback_set(mosq_, &MosquittoClient::OnPublish);
  mosquitto_message_callback_set(mosq_, &MosquittoClient::OnMessage);
  mosquitto_subscribe_callback_set(mosq_, &MosquittoClient::OnSubscribe);
  return core::Status::Ok();
}

MosquittoClient::~MosquittoClient() {
  Stop();
  if (mosq_ != nullptr) mosquitto_destroy(mosq_);
}

void MosquittoClient::SetMessageHandler(MessageHandler handler) {
  std::lock_guard lock(mutex_);
  assert(!started_ && "SetMessageHandler() must come before Start()");
  if (!started_) message_handler_ = std::move(handler);
}

void MosquittoClient::SetBatchEndHandler(BatchEndHandler handler) {
  std::lock_guard lock(mutex_);
  assert(!started_ && "SetBatchEndHandler() must come before Start()");
  if (!started_) batch_end_handler_ = std::move(handler);
}

void MosquittoClient::EndBatch() {
  if (batch_messages_ == 0) return;
  batch_messages_ = 0;
  if (batch_end_handler_) batch_end_handler_();
}

void MosquittoClient::SetConnectionHandler(ConnectionHandler handler) {
  std::lock_guard lock(mutex_);
  assert(!started_ && "SetConnectionHandler() must come before Start()");
  if (!started_) connection_handler_ = std::move(handler);
}

std::string MosquittoClient::BrokerName() const {
  const bool ipv6 = options_.host.find(':') != std::string::npos;
  return (ipv6 ? "[" + options_.host + "]" : options_.host) + ":" + std::to_string(options_.port);
}

core::Status MosquittoClient::Start() {
  {
    std::lock_guard lock(mutex_);
    if (stopped_) return core::Status::FailedPrecondition("MQTT client: already stopped");
    if (started_) return core::Status::FailedPrecondition("MQTT client: already started");
    started_ = true;
  }
  const int rc =
      mosquitto_connect_async(mosq_, options_.host.c_str(), options_.port, options_.keepalive_s);
  const bool connect_failed = rc != MOSQ_ERR_SUCCESS;
  if (connect_failed) {
    std::lock_guard lock(mutex_);
    ++stats_.connect_failures;
    stats_.last_error = internal::MosquittoStatus(rc, "connecting to " + BrokerName()).message();
  }
  thread_ = std::thread([this, connect_failed] { Run(connect_failed); });
  return core::Status::Ok();
}

void MosquittoClient::Run(bool connect_failed) {
  bool need_connect = connect_failed;
  failures_in_row_ = connect_failed ? 1 : 0;
  attempt_connected_ = false;
  attempt_refused_ = false;
  while (true) {
    {
      std::lock_guard lock(mutex_);
      if (stopping_ && (need_connect || std::chrono::steady_clock::now() > stop_deadline_)) break;
    }
    if (need_connect) {
      if (!WaitBackoff(failures_in_row_)) break;
      std::lock_guard connect_lock(connect_mutex_);
      {
        std::lock_guard lock(mutex_);
        if (stopping_) break;
      }
      attempt_connected_ = false;
      attempt_refused_ = false;
      const int rc = mosquitto_reconnect_async(mosq_);
      if (rc != MOSQ_ERR_SUCCESS) {
        std::lock_guard lock(mutex_);
        ++stats_.connect_failures;
        stats_.last_error =
            internal::MosquittoStatus(rc, "connecting to " + BrokerName()).message();
        ++failures_in_row_;
        continue;
      }
      need_connect = false;
    }
    const int rc = mosquitto_loop(mosq_, kLoopTimeoutMs, 1);
    EndBatch();  // what this read delivered, also when the connection went with it
    if (rc == MOSQ_ERR_SUCCESS && mosquitto_socket(mosq_) != -1) {
      FlushOutbox();
      continue;
    }
    // The connection is gone: lost, refused, never made, or closed by Stop().
    need_connect = true;
    std::lock_guard lock(mutex_);
    if (stopping_) break;
    if (!attempt_connected_) {
      ++stats_.connect_failures;
      if (!attempt_refused_) {
        stats_.last_error =
            internal::MosquittoStatus(rc == MOSQ_ERR_SUCCESS ? MOSQ_ERR_CONN_LOST : rc,
                                      "connecting to " + BrokerName())
                .message();
      }
    }
    ++failures_in_row_;
  }
}

bool MosquittoClient::WaitBackoff(int failures) {
  std::uniform_real_distribution<double> unit(0.0, 1.0);
  const double delay_s = internal::ReconnectDelaySeconds(
      failures, options_.reconnect_min_s, options_.reconnect_max_s, unit(jitter_rng_));
  const auto wait = std::chrono::duration_cast<std::chrono::steady_clock::duration>(
      std::chrono::duration<double>(delay_s));
  std::unique_lock lock(mutex_);
  return !wake_.wait_for(lock, wait, [this] { return stopping_; });
}

core::Status MosquittoClient::SendLocked(const std::string& topic, std::string_view payload,
                                         int qos, bool retain) {
  const int rc = mosquitto_publish(mosq_, nullptr, topic.c_str(), static_cast<int>(payload.size()),
                                   payload.data(), qos, retain);
  if (rc == MOSQ_ERR_SUCCESS) {
    ++stats_.published;
    return core::Status::Ok();
  }
  if (qos == 0 && (rc == MOSQ_ERR_NO_CONN || rc == MOSQ_ERR_CONN_LOST)) ++stats_.publish_dropped;
  return internal::MosquittoStatus(rc, internal::TopicPrefix(topic) + "publish");
}

void MosquittoClient::FlushOutbox() {
  bool sent = false;
  {
    std::lock_guard lock(mutex_);
    while (connected_ && !outbox_.empty()) {
      const internal::OutboundMessage& message = outbox_.front();
      core::Status s = SendLocked(message.topic, message.payload, message.qos, message.retain);
      if (!s.ok()) {
        if (s.code() == core::StatusCode::kUnavailable) break;  // try again after reconnect
        // Refused for good (e.g. larger than the broker accepts): drop and say why.
        ++stats_.publish_dropped;
        stats_.last_error = s.message();
      }
      outbox_.PopFront();
      sent = true;
    }
  }
  if (sent) wake_.notify_all();
}

void MosquittoClient::Stop() {
  assert(std::this_thread::get_id() != thread_.get_id() && "Stop() called from a bus handler");
  {
    std::unique_lock lock(mutex_);
    if (!started_ || stopped_ || stopping_) {
      stopped_ = true;
      return;
    }
    // Let queued and unacknowledged publishes go out first (alerts raised just before a
    // shutdown should reach the operators), but only while connected and not for long.
    const auto drained = [this] {
      return !connected_ || (outbox_.empty() && stats_.published == stats_.publish_completed);
    };
    wake_.wait_for(lock, std::chrono::duration<double>(options_.stop_drain_s), drained);
  }
  {
    std::lock_guard connect_lock(connect_mutex_);  // no reconnect starts after this
    std::lock_guard lock(mutex_);
    stopping_ = true;
    stop_deadline_ = std::chrono::steady_clock::now() + kStopTimeout;
  }
  wake_.notify_all();
  // Sends DISCONNECT when connected (so the broker does not publish the will); when not
  // connected it returns MOSQ_ERR_NO_CONN, which is fine.
  mosquitto_disconnect(mosq_);
  if (thread_.joinable()) thread_.join();
  std::lock_guard lock(mutex_);
  stopped_ = true;
  connected_ = false;
}

core::Status MosquittoClient::Publish(std::string_view topic, std::string_view payload, int qos,
                                      bool retain) {
  if (const char* why = BadPublishTopic(topic)) {
    return core::Status::InvalidArgument(internal::TopicPrefix(topic) + "cannot publish: " + why);
  }
  if (qos < 0 || qos > 2) {
    return core::Status::InvalidArgument(internal::TopicPrefix(topic) + "QoS " +
                                         std::to_string(qos) + ": must be 0, 1 or 2");
  }
  if (payload.size() > kMaxPayloadBytes) {
    return core::Status::InvalidArgument(internal::TopicPrefix(topic) + "payload of " +
                                         std::to_string(payload.size()) +
                                         " bytes exceeds MQTT's 268435455");
  }
  std::string topic_copy(topic);
  std::lock_guard lock(mutex_);
  if (stopping_ || stopped_) {
    return core::Status::FailedPrecondition(internal::TopicPrefix(topic) +
                                            "MQTT client is stopped");
  }
  if (connected_ && (qos == 0 || outbox_.empty())) {
    return SendLocked(topic_copy, payload, qos, retain);
  }
  if (qos == 0) {
    ++stats_.publish_dropped;
    return core::Status::Unavailable(internal::TopicPrefix(topic) + "not connected to " +
                                     BrokerName() + ", QoS 0 message dropped");
  }
  const bool dropped = outbox_.Push(internal::OutboundMessage{.topic = std::move(topic_copy),
                                                              .payload = std::string(payload),
                                                              .qos = qos,
                                                              .retain = retain});
  if (dropped && outbox_.capacity() == 0) {
    return core::Status::Unavailable(internal::TopicPrefix(topic) + "not connected to " +
                                     BrokerName() + " and outbox_capacity is 0, message dropped");
  }
  return core::Status::Ok();
}

core::Status MosquittoClient::Subscribe(std::string_view filter, int qos) {
  if (const char* why = BadFilter(filter)) {
    return core::Status::InvalidArgument("subscription filter '" +
                                         internal::Printable(filter, internal::kMaxQuotedTopic) +
                                         "': " + why);
  }
  if (qos < 0 || qos > 2) {
    return core::Status::InvalidArgument("subscription filter '" + std::string(filter) + "': QoS " +
                                         std::to_string(qos) + " must be 0, 1 or 2");
  }
  std::lock_guard lock(mutex_);
  if (stopping_ || stopped_) {
    return core::Status::FailedPrecondition("subscription filter '" + std::string(filter) +
                                            "': MQTT client is stopped");
  }
  auto it = std::find_if(subscriptions_.begin(), subscriptions_.end(),
                         [filter](const Subscription& s) { return s.filter == filter; });
  if (it == subscriptions_.end()) {
    subscriptions_.push_back(Subscription{.filter = std::string(filter), .qos = qos});
    it = subscriptions_.end() - 1;
  } else {
    it->qos = qos;
  }
  if (!connected_) return core::Status::Ok();  // sent on the next connect
  int mid = 0;
  const int rc = mosquitto_subscribe(mosq_, &mid, it->filter.c_str(), qos);
  if (rc == MOSQ_ERR_SUCCESS) {
    pending_subscribes_[mid] = it->filter;
    return core::Status::Ok();
  }
  if (rc == MOSQ_ERR_NO_CONN) return core::Status::Ok();  // lost just now; sent on reconnect
  return internal::MosquittoStatus(rc, "subscription filter '" + it->filter + "'");
}

core::Status MosquittoClient::Unsubscribe(std::string_view filter) {
  std::lock_guard lock(mutex_);
  const auto it = std::find_if(subscriptions_.begin(), subscriptions_.end(),
                               [filter](const Subscription& s) { return s.filter == filter; });
  if (it == subscriptions_.end()) return core::Status::Ok();
  const std::string name = it->filter;
  subscriptions_.erase(it);
  if (!connected_ || stopping_ || stopped_) return core::Status::Ok();  // not renewed on connect
  const int rc = mosquitto_unsubscribe(mosq_, nullptr, name.c_str());
  if (rc == MOSQ_ERR_SUCCESS || rc == MOSQ_ERR_NO_CONN) return core::Status::Ok();
  return internal::MosquittoStatus(rc, "unsubscribing from '" + name + "'");
}

bool MosquittoClient::IsConnected() const {
  std::lock_guard lock(mutex_);
  return connected_;
}

BusStats MosquittoClient::stats() const {
  std::lock_guard lock(mutex_);
  BusStats out = stats_;
  out.connected = connected_;
  out.outbox_size = outbox_.size();
  out.outbox_dropped = outbox_.dropped();
  return out;
}

void MosquittoClient::OnConnect(mosquitto* /*mosq*/, void* obj, int rc) {
  auto* self = static_cast<MosquittoClient*>(obj);
  if (rc != 0) {
    const char* why = self->options_.protocol == MqttProtocol::kV5 ? mosquitto_reason_string(rc)
                                                                   : mosquitto_connack_string(rc);
    std::lock_guard lock(self->mutex_);
    self->attempt_refused_ = true;
    self->stats_.last_error = self->BrokerName() + " refused the connection: " + why;
    return;
  }
  self->failures_in_row_ = 0;
  self->attempt_connected_ = true;
  {
    std::lock_guard lock(self->mutex_);
    self->connected_ = true;
    ++self->stats_.connects;
    if (self->stats_.connects > 1) ++self->stats_.reconnects;
    for (const Subscription& sub : self->subscriptions_) {
      int mid = 0;
      const int sub_rc = mosquitto_subscribe(self->mosq_, &mid, sub.filter.c_str(), sub.qos);
      if (sub_rc == MOSQ_ERR_SUCCESS) {
        self->pending_subscribes_[mid] = sub.filter;
      } else {
        self->stats_.last_error =
            internal::MosquittoStatus(sub_rc, "subscription filter '" + sub.filter + "'").message();
      }
    }
    if (self->options_.announce) {
      const MqttMessage& announce = *self->options_.announce;
      core::Status s =
          self->SendLocked(announce.topic, announce.payload, announce.qos, announce.retain);
      if (!s.ok()) self->stats_.last_error = s.message();
    }
  }
  if (self->connection_handler_) self->connection_handler_(true);
}

void MosquittoClient::OnDisconnect(mosquitto* /*mosq*/, void* obj, int rc) {
  auto* self = static_cast<MosquittoClient*>(obj);
  bool was_connected = false;
  {
    std::lock_guard lock(self->mutex_);
    was_connected = self->connected_;
    self->connected_ = false;
    self->pending_subscribes_.clear();
    if (was_connected && rc != 0 && !self->stopping_) {
      self->stats_.last_error =
          internal::MosquittoStatus(rc, "connection to " + self->BrokerName() + " lost").message();
    }
  }
  self->wake_.notify_all();
  if (was_connected && self->connection_handler_) self->connection_handler_(false);
}

void MosquittoClient::OnPublish(mosquitto* /*mosq*/, void* obj, int /*mid*/) {
  auto* self = static_cast<MosquittoClient*>(obj);
  {
    std::lock_guard lock(self->mutex_);
    ++self->stats_.publish_completed;
  }
  self->wake_.notify_all();
}

void MosquittoClient::OnMessage(mosquitto* /*mosq*/, void* obj, const mosquitto_message* message) {
  auto* self = static_cast<MosquittoClient*>(obj);
  {
    std::lock_guard lock(self->mutex_);
    if (self->options_.skip_retained && message->retain) {
      ++self->stats_.retained_skipped;
      return;
    }
    ++self->stats_.messages_in;
  }
  if (!self->message_handler_) return;
  const std::string_view topic(message->topic);
  const std::string_view payload(static_cast<const char*>(message->payload),
                                 static_cast<std::size_t>(message->payloadlen));
  self->message_handler_(topic, payload);
  ++self->batch_messages_;
}

void MosquittoClient::OnSubscribe(mosquitto* /*mosq*/, void* obj, int mid, int qos_count,
                                  const int* granted_qos) {
  auto* self = static_cast<MosquittoClient*>(obj);
  std::lock_guard lock(self->mutex_);
  std::string filter = "?";
  if (const auto it = self->pending_subscribes_.find(mid); it != self->pending_subscribes_.end()) {
    filter = it->second;
    self->pending_subscribes_.erase(it);
  }
  ++self->stats_.subscribe_acks;
  for (int i = 0; i < qos_count; ++i) {
    if (granted_qos[i] >= 0x80) {
      ++self->stats_.subscribe_refused;
      self->stats_.last_error =
          "broker " + self->BrokerName() + " refused subscription to '" + filter + "'";
    }
  }
}

}  // namespace nightjar::mqtt
