// SampleIntake: MQTT messages -> (channel, time, value) samples, through topic rules.
//
// Each IntakeRule pairs a topic pattern and channel template (topic_mapping.h) with a
// payload format (payload.h). Attach() subscribes the bus to every rule's filter and
// installs the intake as the bus's message handler. For each message the first rule
// whose pattern the topic fits (TopicPattern::Matches) names the channel and parses the
// payload, so list specific rules before general ones; a message then ends as exactly
// one of
//   a sample       passed to the sample sink;
//   unmapped       no rule fits, or the fitting rule rejects a level (e.g. one holding
//                  '.'): counted, and reported (rate-limited) under kUnmappedKey;
//   bad payload    counted per channel in a BadPayloadLog and reported rate-limited.
// Reports go to the problem sink as a Status naming the topic and what is wrong, with
// the count of like problems left unreported since the channel's previous report.
//
// The arrival time comes from the clock given to Create() (the daemon passes the system
// clock; tests pass a fake). It is read once per message, before parsing.
//
// Threads: OnMessage() runs where the bus calls it (the network thread), one call at a
// time; it only maps, parses and calls the sinks, which must be quick (push to a bounded
// queue). stats() is safe from any thread.
// Ownership: the caller owns the intake and the bus; the intake must outlive the bus's
// running time (Stop() the bus before destroying the intake). Views passed to sinks
// are valid during the call only.
#pragma once

#include <cstdint>
#include <functional>
#include <memory>
#include <mutex>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

#include "core/status.h"
#include "core/time.h"
#include "mqtt/bad_payload_log.h"
#include "mqtt/message_bus.h"
#include "mqtt/payload.h"
#include "mqtt/topic_mapping.h"

namespace nightjar::mqtt {

struct IntakeRule {
  // Topic pattern, e.g. "brackwater/{area}/{asset}/{signal}".
  std::string topic;
  // Channel template, e.g. "{area}.{asset}.{signal}".
  std::string channel;
  // How the payloads on these topics are written. Default: a plain number.
  PayloadFormat payload;
  // Subscription QoS, 0..2. Default 1 (the broker resends what the connection lost).
  int qos = 1;
};

struct IntakeOptions {
  // Tried in order; at least one.
  std::vector<IntakeRule> rules;
  BadPayloadLogOptions bad_payload_log;
};

struct IntakeStats {
  std::uint64_t messages = 0;      // messages seen
  std::uint64_t samples = 0;       // samples passed to the sink
  std::uint64_t unmapped = 0;      // messages whose topic no rule maps
  std::uint64_t bad_payloads = 0;  // messages whose payload did not parse
  // Bad payloads per channel, sorted by channel.
  std::vector<std::pair<std::string, std::uint64_t>> bad_payloads_by_channel;
};

class SampleIntake {
 public:
  // The key unmapped topics are rate-limited under in problem reports.
  static constexpr std::string_view kUnmappedKey = "(unmapped topic)";

  using Clock = std::function<core::TimestampUs()>;
  using SampleSink =
      std::function<void(std::string_view channel, core::TimestampUs time, double value)>;
  // `channel` is the channel, or kUnmappedKey; `suppressed` counts like problems on it
  // since its previous report.
  using ProblemSink = std::function<void(std::string_view channel, const core::Status& problem,
                                         std::uint64_t suppressed)>;

  // Compiles every rule; InvalidArgument naming the rule ("rules[1].topic: ...") if one
  // is bad, or if there are none. clock and on_sample are required; on_problem may be
  // empty (problems are then only counted).
  static core::Result<std::unique_ptr<SampleIntake>> Create(IntakeOptions options, Clock clock,
                                                            SampleSink on_sample,
                                                            ProblemSink on_problem);

  // Sets the bus's message handler to OnMessage and subscribes every distinct filter
  // (duplicates once, at the highest QoS asked). Call before the bus's Start().
  core::Status Attach(MessageBus& bus);

  // Handles one message (what the bus's handler calls).
  void OnMessage(std::string_view topic, std::string_view payload);

  IntakeStats stats() const;
  // The MQTT filters the rules subscribe to, in rule order, without duplicates.
  std::vector<std::pair<std::string, int>> Filters() const;

 private:
  struct Rule {
    TopicPattern pattern;
    PayloadParser parser;
    int qos;
  };

  SampleIntake(std::vector<Rule> rules, BadPayloadLogOptions log_options, Clock clock,
               SampleSink on_sample, ProblemSink on_problem);
  void Report(std::string_view key, const core::Status& problem, core::TimestampUs now,
              bool bad_payload);

  const std::vector<Rule> rules_;
  const Clock clock_;
  const SampleSink on_sample_;
  const ProblemSink on_problem_;
  std::string channel_;  // scratch for the current message (OnMessage is never concurrent)

  mutable std::mutex mutex_;
  // Guarded by mutex_:
  BadPayloadLog bad_payloads_;
  BadPayloadLog unmapped_;
  IntakeStats stats_;  // bad_payloads_by_channel filled in by stats()
};

}  // namespace nightjar::mqtt
