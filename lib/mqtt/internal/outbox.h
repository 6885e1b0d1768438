// Outbox: QoS >= 1 publishes made while the client is disconnected, waiting to be sent.
//
// Bounded: it holds at most `capacity` messages; pushing into a full outbox drops the
// oldest (the newest news matters most to an operator) and counts it. Sent in push order.
// Capacity 0 keeps nothing: every push is dropped and counted.
//
// Thread-safety: none; MosquittoClient guards it with its mutex. Ownership: owns copies.
#pragma once

#include <cstddef>
#include <cstdint>
#include <deque>
#include <string>
#include <utility>

namespace nightjar::mqtt::internal {

struct OutboundMessage {
  std::string topic;
  std::string payload;
  int qos = 1;
  bool retain = false;
};

class Outbox {
 public:
  explicit Outbox(std::size_t capacity) : capacity_(capacity) {}

  // Appends `message`, first dropping the oldest one if full. Returns whether one was
  // dropped (with capacity 0, the message itself).
  bool Push(OutboundMessage message) {
    if (capacity_ == 0) {
      ++dropped_;
      return true;
    }
    bool dropped = false;
    if (queue_.size() == capacity_) {
      queue_.pop_front();
      ++dropped_;
      dropped = true;
    }
    queue_.push_back(std::move(message));
    return dropped;
  }

  bool empty() const { return queue_.empty(); }
  std::size_t size() const { return queue_.size(); }
  std::size_t capacity() const { return capacity_; }
  std::uint64_t dropped() const { return dropped_; }
  const OutboundMessage& front() const { return queue_.front(); }
  void PopFront() { queue_.pop_front(); }

 private:
  std::size_t capacity_;
  std::deque<OutboundMessage> queue_;
  std::uint64_t dropped_ = 0;
};

}  // namespace nightjar::mqtt::internal
