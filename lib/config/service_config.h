// The daemon's part of the config file: the `mqtt:` and `daemon:` sections.
//
// Plain structs that `nightjar run` reads (lib/service turns them into the MQTT client's
// and the runtime's options), and the key table describing every key: path, type, bounds,
// unit, doc and, for strings with a fixed set of values, the choices. The loader
// (config.cc), RenderReferenceYaml() and the tests that keep config/nightjar.yaml complete
// all read this table, so a key cannot be parsed without being documented.
//
// `mqtt.subscriptions` is a list of mappings with the SubscriptionKeys; each entry keeps
// the line and column it was written at, so errors found later (a topic pattern that does
// not compile) can still name file:line:col.
//
// The config module does not know the MQTT module: protocol, payload and time unit stay
// validated strings here and are mapped to the MQTT types by lib/service.
//
// Thread-safety: the tables are immutable static data; the structs are plain values.
#pragma once

#include <span>
#include <string>
#include <string_view>
#include <variant>
#include <vector>

#include "config/key_table.h"

namespace nightjar::config {

// One entry of mqtt.subscriptions: which topics carry samples and how they are written.
struct SubscriptionConfig {
  std::string topic;                  // topic pattern, e.g. "brackwater/{area}/{asset}/{signal}"
  std::string channel;                // channel template, e.g. "{area}.{asset}.{signal}"
  std::string payload = "plain";      // plain | json
  std::string value_field = "value";  // json: dotted path of the value
  std::string time_field;             // json: dotted path of the sample time; "" = arrival
  std::string time_unit = "iso8601";  // iso8601 | epoch_s | epoch_ms
  int line = 0;                       // of the entry, for errors found after loading
  int column = 0;
};

struct MqttConfig {
  std::string host = "127.0.0.1";
  int port = 1883;
  std::string client_id = "nightjar";
  int keepalive_s = 30;
  bool clean_session = true;
  std::string protocol = "3.1.1";  // 3.1.1 | 5
  std::string username;            // "" = none
  std::string password_file;       // "" = none; first line of the file is the password
  int qos = 1;                     // QoS of alerts, state, status and replies
  std::string alert_prefix = "nightjar/alert";
  std::string state_prefix = "nightjar/state";
  std::string status_topic = "nightjar/status";
  std::string command_topic = "nightjar/command";
  std::string reply_topic = "nightjar/reply";
  std::vector<SubscriptionConfig> subscriptions;
};

struct DaemonConfig {
  int workers = 1;
  int queue_capacity = 8192;
  int outbox_capacity = 10000;
  std::string state_dir = "/var/lib/nightjar";
  double checkpoint_interval_s = 300.0;
  std::string metrics_listen;  // "" = off
  double publish_interval_s = 5.0;
};

struct ServiceConfig {
  MqttConfig mqtt;
  DaemonConfig daemon;
};

// Where a key's value lives inside a ServiceConfig (or, for subscription keys, inside
// one SubscriptionConfig).
using ServiceFieldRef = std::variant<std::string*, bool*, int*, double*>;

struct ServiceKeySpec {
  std::string_view path;  // "mqtt.keepalive_s"
  ServiceFieldRef (*field)(ServiceConfig& config);
  Bounds bounds;  // for int and double
  std::string_view unit;
  std::string_view doc;
  std::span<const std::string_view> choices;  // allowed strings; empty = any

  ValueType type() const;            // kString, kBool, kInt or kDouble
  std::string_view section() const;  // "mqtt" or "daemon"
  std::string_view name() const;     // "keepalive_s"
};

struct SubscriptionKeySpec {
  std::string_view name;  // "value_field" (full path "mqtt.subscriptions[0].value_field")
  std::string* (*field)(SubscriptionConfig& entry);
  std::string_view doc;
  std::span<const std::string_view> choices;
  bool required = false;
};

// The scalar keys of mqtt: and daemon:, in struct order (subscriptions is not among them).
std::span<const ServiceKeySpec> ServiceKeys();
const ServiceKeySpec* FindServiceKey(std::string_view path);
std::span<const SubscriptionKeySpec> SubscriptionKeys();
const SubscriptionKeySpec* FindSubscriptionKey(std::string_view name);

// The key's value in a default ServiceConfig, as FormatValue would write it.
Value DefaultServiceValue(const ServiceKeySpec& key);
Value DefaultSubscriptionValue(const SubscriptionKeySpec& key);
// Whether every mqtt: and daemon: key, subscriptions included, has the same value.
bool SameServiceConfig(const ServiceConfig& a, const ServiceConfig& b);
// The key paths whose values differ between `a` and `b`, in key-table order
// ("mqtt.keepalive_s", ...); any difference in the subscription list is the one path
// "mqtt.subscriptions". Empty exactly when SameServiceConfig(a, b).
std::vector<std::string> ChangedServiceKeys(const ServiceConfig& a, const ServiceConfig& b);

// Writes `value` (its alternative must match key.type(); asserted) into `config`.
void SetServiceValue(const ServiceKeySpec& key, const Value& value, ServiceConfig& config);

}  // namespace nightjar::config
