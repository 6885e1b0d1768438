// MessageBus: the publish/subscribe connection the daemon talks to, whatever carries it.
//
// MosquittoClient (mosquitto_client.h) implements it over a real MQTT broker; tests use
// FakeBus (tests/fakes/fake_bus.h). The daemon sees only this interface, so its tests run
// without a broker and its code never names libmosquitto.
//
// Life cycle: create, set the handlers, Subscribe() the filters wanted, Start(). Start()
// returns at once; the connection is made (and remade after every loss) in the background,
// and filters are subscribed again on every connect. Stop() ends it; a stopped bus stays
// stopped (build a new one to reconnect with other options).
//
// Threads: every method is safe to call from any thread, except that the Set*Handler()
// calls must come before Start(). Handlers run on the bus's network thread, one call at a
// time (the batch-end handler after the messages of each batch), and must return quickly:
// copy what they need into a queue and leave the work (model updates, file I/O, logging
// bursts) to other threads. A handler may call Publish() and Subscribe(); it must not
// call Stop() or destroy the bus.
//
// Ownership: the bus copies topics and payloads it keeps; string_views handed to a handler
// are valid only during that call.
#pragma once

#include <cstddef>
#include <cstdint>
#include <functional>
#include <string>
#include <string_view>

#include "core/status.h"

namespace nightjar::mqtt {

// Called for every message received on a subscribed filter.
using MessageHandler = std::function<void(std::string_view topic, std::string_view payload)>;
// Called on the network thread after each read of the connection that passed one or more
// messages to the message handler: those messages form a batch, and a handler that
// collects them (per worker, say) hands them on here, once per batch rather than once
// per message. Every message handed to the message handler is followed by this call
// before the network thread waits for the network again.
using BatchEndHandler = std::function<void()>;
// Called with true after each successful connect (filters already re-subscribed) and with
// false when an established connection is lost or closed. Failed attempts are not reported
// here; they show in BusStats::connect_failures and last_error.
using ConnectionHandler = std::function<void(bool connected)>;

// Counters since the bus was created, for the daemon's periodic report. Monotonic except
// outbox_size (a gauge) and connected.
struct BusStats {
  bool connected = false;
  std::uint64_t messages_in = 0;        // messages passed to the message handler
  std::uint64_t retained_skipped = 0;   // retained messages not passed on (see options)
  std::uint64_t published = 0;          // publishes handed to the connection for sending
  std::uint64_t publish_completed = 0;  // QoS 0 sent, QoS 1 PUBACK, QoS 2 PUBCOMP received
  std::uint64_t publish_dropped = 0;    // QoS 0 publishes dropped while disconnected
  std::uint64_t outbox_dropped = 0;     // QoS >= 1 publishes dropped from a full outbox
  std::size_t outbox_size = 0;          // QoS >= 1 publishes waiting for a connection
  std::uint64_t connects = 0;           // successful connects (CONNACK accepted)
  std::uint64_t reconnects = 0;         // successful connects after the first one
  std::uint64_t connect_failures = 0;   // attempts that failed or were refused
  std::uint64_t subscribe_acks = 0;     // SUBACKs received (each (re)subscribe gets one)
  std::uint64_t subscribe_refused = 0;  // SUBACKs that refused the filter
  std::string last_error;  // latest connection or subscription problem, or ""; kept after a
                           // later success so a report can still say why the bus was down
};

class MessageBus {
 public:
  virtual ~MessageBus();

  // Sets the handler for incoming messages (empty: messages are counted and dropped).
  // Before Start() only.
  virtual void SetMessageHandler(MessageHandler handler) = 0;
  // Sets the handler called at the end of each batch of messages (empty: none). Before
  // Start() only.
  virtual void SetBatchEndHandler(BatchEndHandler handler) = 0;
  // Sets the handler for connection changes (empty: none). Before Start() only.
  virtual void SetConnectionHandler(ConnectionHandler handler) = 0;

  // Starts connecting in the background and returns: OK even while the broker is down
  // (the bus keeps trying). FailedPrecondition if already started or stopped.
  virtual core::Status Start() = 0;
  // Waits a bounded time for queued QoS >= 1 publishes to be sent and acknowledged, then
  // disconnects cleanly (a clean disconnect does not fire the last will) and stops the
  // network thread. Idempotent. Not from a handler.
  virtual void Stop() = 0;

  // Publishes `payload` on `topic` (no wildcards) with QoS 0, 1 or 2. While disconnected a
  // QoS >= 1 publish waits in the outbox and goes out, in order, after the next connect;
  // a QoS 0 publish is dropped and counted, returning Unavailable. InvalidArgument names
  // the topic for a bad topic, QoS or payload size; FailedPrecondition after Stop().
  virtual core::Status Publish(std::string_view topic, std::string_view payload, int qos,
                               bool retain) = 0;
  // Subscribes to an MQTT filter (wildcards + and # allowed) with the given maximum QoS,
  // now if connected and again after every connect. Subscribing to a filter twice updates
  // its QoS. InvalidArgument names the filter when it is malformed.
  virtual core::Status Subscribe(std::string_view filter, int qos) = 0;
  // Stops subscribing to a filter given to Subscribe() (now if connected, and not again
  // after a connect). A filter that is not subscribed is OK (nothing to do).
  virtual core::Status Unsubscribe(std::string_view filter) = 0;

  virtual bool IsConnected() const = 0;
  virtual BusStats stats() const = 0;
};

}  // namespace nightjar::mqtt
