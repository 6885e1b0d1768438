// FakeBus: an in-memory MessageBus for unit tests of code that talks MQTT.
//
// It records what is published and subscribed, delivers messages a test injects (only if
// a subscribed filter matches, as a broker would), and lets the test connect and
// disconnect it. Deliver() is a batch of one, DeliverBatch() several messages followed by
// one batch-end call. Handlers run on the thread that calls Deliver() / DeliverBatch() /
// SetConnected(), not on a network thread. Outbox behaviour is the real client's in
// miniature: while disconnected, QoS >= 1 publishes are held (unbounded) and released in
// order on connect; QoS 0 publishes are dropped and counted.
//
// Thread-safety: all methods may be called from any thread; handlers are called without
// the fake's lock held, so they may publish. Ownership: a plain object owned by the test.
#pragma once

#include <algorithm>
#include <cstddef>
#include <mutex>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

#include "core/status.h"
#include "mqtt/message_bus.h"
#include "mqtt/topic_mapping.h"

namespace nightjar::testing {

class FakeBus final : public mqtt::MessageBus {
 public:
  struct Published {
    std::string topic;
    std::string payload;
    int qos = 0;
    bool retain = false;
  };
  struct Subscribed {
    std::string filter;
    int qos = 0;
  };

  // `connect_on_start`: whether Start() connects at once (else call SetConnected(true)).
  explicit FakeBus(bool connect_on_start = true) : connect_on_start_(connect_on_start) {}

  void SetMessageHandler(mqtt::MessageHandler handler) override {
    std::lock_guard lock(mutex_);
    message_handler_ = std::move(handler);
  }
  void SetBatchEndHandler(mqtt::BatchEndHandler handler) override {
    std::lock_guard lock(mutex_);
    batch_end_handler_ = std::move(handler);
  }
  void SetConnectionHandler(mqtt::ConnectionHandler handler) override {
    std::lock_guard lock(mutex_);
    connection_handler_ = std::move(handler);
  }

  core::Status Start() override {
    {
      std::lock_guard lock(mutex_);
      if (started_ || stopped_) return core::Status::FailedPrecondition("FakeBus: started twice");
      started_ = true;
    }
    if (connect_on_start_) SetConnected(true);
    return core::Status::Ok();
  }

  void Stop() override {
    bool was_connected = false;
    mqtt::ConnectionHandler handler;
    {
      std::lock_guard lock(mutex_);
      stopped_ = true;
      was_connected = connected_;
      connected_ = false;
      handler = connection_handler_;
    }
    if (was_connected && handler) handler(false);
  }

  core::Status Publish(std::string_view topic, std::string_view payload, int qos,
                       bool retain) override {
    if (topic.empty() || topic.find_first_of("+#") != std::string_view::npos) {
      return core::Status::InvalidArgument("topic " + std::string(topic) + ": cannot publish");
    }
    if (qos < 0 || qos > 2) return core::Status::InvalidArgument("bad QoS");
    std::lock_guard lock(mutex_);
    if (stopped_) return core::Status::FailedPrecondition("FakeBus: stopped");
    Published message{std::string(topic), std::string(payload), qos, retain};
    if (connected_) {
      published_.push_back(std::move(message));
      ++stats_.published;
      ++stats_.publish_completed;
    } else if (qos == 0) {
      ++stats_.publish_dropped;
      return core::Status::Unavailable("topic " + std::string(topic) + ": FakeBus disconnected");
    } else {
      outbox_.push_back(std::move(message));
    }
    return core::Status::Ok();
  }

  core::Status Subscribe(std::string_view filter, int qos) override {
    if (filter.empty() || qos < 0 || qos > 2) {
      return core::Status::InvalidArgument("bad filter '" + std::string(filter) + "'");
    }
    std::lock_guard lock(mutex_);
    auto it = std::find_if(subscriptions_.begin(), subscriptions_.end(),
                           [filter](const Subscribed& s) { return s.filter == filter; });
    if (it == subscriptions_.end()) {
      subscriptions_.push_back(Subscribed{std::string(filter), qos});
    } else {
      it->qos = qos;
    }
    return core::Status::Ok();
  }

  core::Status Unsubscribe(std::string_view filter) override {
    std::lock_guard lock(mutex_);
    std::erase_if(subscriptions_, [filter](const Subscribed& s) { return s.filter == filter; });
    return core::Status::Ok();
  }

  bool IsConnected() const override {
    std::lock_guard lock(mutex_);
    return connected_;
  }

  mqtt::BusStats stats() const override {
    std::lock_guard lock(mutex_);
    mqtt::BusStats out = stats_;
    out.connected = connected_;
    out.outbox_size = outbox_.size();
    return out;
  }

  // Test controls.

  // Delivers a message as if from the broker, as a batch of one (the batch-end handler
  // follows); false (nothing delivered) if no subscribed filter matches `topic`.
  bool Deliver(std::string_view topic, std::string_view payload) {
    return DeliverBatch({{std::string(topic), std::string(payload)}}) == 1;
  }

  // Delivers (topic, payload) messages as one batch: each one a subscribed filter matches
  // goes to the message handler, in order, then the batch-end handler runs once if any
  // did. Returns how many were delivered.
  std::size_t DeliverBatch(const std::vector<std::pair<std::string, std::string>>& messages) {
    mqtt::MessageHandler handler;
    mqtt::BatchEndHandler batch_end;
    {
      std::lock_guard lock(mutex_);
      if (!connected_) return 0;
      handler = message_handler_;
      batch_end = batch_end_handler_;
    }
    std::size_t delivered = 0;
    for (const auto& [topic, payload] : messages) {
      {
        std::lock_guard lock(mutex_);
        const bool subscribed = std::any_of(
            subscriptions_.begin(), subscriptions_.end(),
            [&topic](const Subscribed& s) { return mqtt::TopicMatchesFilter(s.filter, topic); });
        if (!subscribed) continue;
        ++stats_.messages_in;
      }
      ++delivered;
      if (handler) handler(topic, payload);
    }
    if (delivered > 0 && batch_end) batch_end();
    return delivered;
  }

  // Connects (releasing the held publishes in order) or disconnects, calling the
  // connection handler on a change.
  void SetConnected(bool connected) {
    mqtt::ConnectionHandler handler;
    {
      std::lock_guard lock(mutex_);
      if (connected_ == connected) return;
      connected_ = connected;
      if (connected) {
        ++stats_.connects;
        if (stats_.connects > 1) ++stats_.reconnects;
        for (Published& message : outbox_) published_.push_back(std::move(message));
        stats_.published += outbox_.size();
        stats_.publish_completed += outbox_.size();
        outbox_.clear();
      }
      handler = connection_handler_;
    }
    if (handler) handler(connected);
  }

  std::vector<Published> published() const {
    std::lock_guard lock(mutex_);
    return published_;
  }
  std::vector<Subscribed> subscriptions() const {
    std::lock_guard lock(mutex_);
    return subscriptions_;
  }

 private:
  const bool connect_on_start_;
  mutable std::mutex mutex_;
  mqtt::MessageHandler message_handler_;
  mqtt::BatchEndHandler batch_end_handler_;
  mqtt::ConnectionHandler connection_handler_;
  bool started_ = false;
  bool stopped_ = false;
  bool connected_ = false;
  std::vector<Published> published_;
  std::vector<Published> outbox_;
  std::vector<Subscribed> subscriptions_;
  mqtt::BusStats stats_;
};

}  // namespace nightjar::testing
