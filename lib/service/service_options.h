// ServiceOptions: everything `nightjar run` needs, built from a loaded config file.
//
// BuildServiceOptions() turns the mqtt: and daemon: sections into the MQTT client's
// options (last will and online announce on the status topic included), the intake
// rules, the runtime's topics and sizes, and the metrics endpoint's address. It checks what the
// config module cannot (it does not know the MQTT module): topic patterns and channel templates
// compile, the password file can be read. Errors name file:line:col and the key path, like the
// loader.
//
// Thread-safety: pure apart from reading the password file. Ownership: plain values.
#pragma once

#include <cstddef>
#include <optional>
#include <string>
#include <string_view>

#include "config/config.h"
#include "core/status.h"
#include "mqtt/mosquitto_client.h"
#include "mqtt/sample_intake.h"
#include "service/metrics_server.h"

namespace nightjar::service {

struct ServiceOptions {
  mqtt::ClientOptions client;
  mqtt::IntakeOptions intake;
  std::string alert_prefix;
  std::string state_prefix;
  std::string status_topic;
  std::string command_topic;
  std::string reply_topic;
  int qos = 1;
  int workers = 1;
  std::size_t queue_capacity = 8192;
  double publish_interval_s = 5.0;
  // Checkpoints (worker_state.h): written to state_dir ("" = none) every
  // checkpoint_interval_s and on stop; loaded at start from state_in when set (`run
  // --state-in DIR`, not from the config), else from state_dir.
  std::string state_dir;
  std::string state_in;
  double checkpoint_interval_s = 300.0;
  std::optional<ListenAddress> metrics_listen;  // daemon.metrics_listen; none = off
};

// `source` is the config file's name for errors; `broker` ("HOST:PORT", "HOST" or
// "[v6addr]:PORT"), when set, overrides mqtt.host and mqtt.port. InvalidArgument with
// every problem found, one per line.
core::Result<ServiceOptions> BuildServiceOptions(const config::LoadedConfig& config,
                                                 std::string_view source,
                                                 const std::optional<std::string>& broker);

// "HOST:PORT" -> (host, port); InvalidArgument saying what is wrong.
core::Status ParseBrokerAddress(std::string_view text, std::string* host, int* port);

}  // namespace nightjar::service
