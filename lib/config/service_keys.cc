#include <algorithm>
#include <array>
#include <cassert>
#include <limits>
#include <string>

#include "config/service_config.h"

namespace nightjar::config {
namespace {

constexpr double kInf = std::numeric_limits<double>::infinity();
constexpr Bounds Closed(double lo, double hi) { return {lo, hi, false, false}; }
constexpr Bounds Above(double lo) { return {lo, kInf, true, true}; }
constexpr Bounds None() { return {}; }

constexpr std::array<std::string_view, 2> kProtocols = {"3.1.1", "5"};
constexpr std::array<std::string_view, 2> kPayloads = {"plain", "json"};
constexpr std::array<std::string_view, 3> kTimeUnits = {"iso8601", "epoch_s", "epoch_ms"};

#define NIGHTJAR_SERVICE_FIELD(member) \
  +[](ServiceConfig& c) -> ServiceFieldRef { return ServiceFieldRef(&c.member); }

// Bounds mirror what the MQTT client and the runtime accept (mqtt::ValidateClientOptions,
// service::ValidateServiceOptions), so a config that loads also starts.
const std::array kServiceKeys = {
    ServiceKeySpec{"mqtt.host",
                   NIGHTJAR_SERVICE_FIELD(mqtt.host),
                   None(),
                   "",
                   "broker host name or address (nightjar run --broker overrides it)",
                   {}},
    ServiceKeySpec{"mqtt.port",
                   NIGHTJAR_SERVICE_FIELD(mqtt.port),
                   Closed(1, 65535),
                   "",
                   "broker TCP port",
                   {}},
    ServiceKeySpec{"mqtt.client_id",
                   NIGHTJAR_SERVICE_FIELD(mqtt.client_id),
                   None(),
                   "",
                   "MQTT client identifier; the broker drops an older connection with the same id",
                   {}},
    ServiceKeySpec{"mqtt.keepalive_s",
                   NIGHTJAR_SERVICE_FIELD(mqtt.keepalive_s),
                   Closed(5, 65535),
                   "s",
                   "keepalive interval; a dead link is noticed within about 1.5 times this",
                   {}},
    ServiceKeySpec{"mqtt.clean_session",
                   NIGHTJAR_SERVICE_FIELD(mqtt.clean_session),
                   None(),
                   "",
                   "start each connection with a fresh session (false needs protocol 3.1.1)",
                   {}},
    ServiceKeySpec{"mqtt.protocol", NIGHTJAR_SERVICE_FIELD(mqtt.protocol), None(), "",
                   "MQTT protocol version: 3.1.1 or 5", kProtocols},
    ServiceKeySpec{"mqtt.username",
                   NIGHTJAR_SERVICE_FIELD(mqtt.username),
                   None(),
                   "",
                   "user name sent to the broker; empty = anonymous",
                   {}},
    ServiceKeySpec{"mqtt.password_file",
                   NIGHTJAR_SERVICE_FIELD(mqtt.password_file),
                   None(),
                   "",
                   "file whose first line is the password (needs username); empty = none",
                   {}},
    ServiceKeySpec{"mqtt.qos",
                   NIGHTJAR_SERVICE_FIELD(mqtt.qos),
                   Closed(0, 2),
                   "",
                   "QoS of alerts, state, status and command replies (subscriptions use 1)",
                   {}},
    ServiceKeySpec{"mqtt.alert_prefix",
                   NIGHTJAR_SERVICE_FIELD(mqtt.alert_prefix),
                   None(),
                   "",
                   "alerts go to <alert_prefix>/<channel with dots as slashes>",
                   {}},
    ServiceKeySpec{"mqtt.state_prefix",
                   NIGHTJAR_SERVICE_FIELD(mqtt.state_prefix),
                   None(),
                   "",
                   "retained channel state goes to <state_prefix>/<channel with dots as slashes>",
                   {}},
    ServiceKeySpec{"mqtt.status_topic",
                   NIGHTJAR_SERVICE_FIELD(mqtt.status_topic),
                   None(),
                   "",
                   "retained daemon status: online with counters, offline as last will",
                   {}},
    ServiceKeySpec{"mqtt.command_topic",
                   NIGHTJAR_SERVICE_FIELD(mqtt.command_topic),
                   None(),
                   "",
                   "operator commands (acknowledge, shelve, unshelve) arrive here as JSON",
                   {}},
    ServiceKeySpec{"mqtt.reply_topic",
                   NIGHTJAR_SERVICE_FIELD(mqtt.reply_topic),
                   None(),
                   "",
                   "the result of each command is published here",
                   {}},

    ServiceKeySpec{"daemon.workers",
                   NIGHTJAR_SERVICE_FIELD(daemon.workers),
                   Closed(1, 256),
                   "threads",
                   "engine worker threads; each owns a shard of the channels",
                   {}},
    ServiceKeySpec{"daemon.queue_capacity",
                   NIGHTJAR_SERVICE_FIELD(daemon.queue_capacity),
                   Closed(16, 16777216),
                   "samples",
                   "bounded queue per worker; a sample arriving at a full queue is dropped and "
                   "counted",
                   {}},
    ServiceKeySpec{"daemon.outbox_capacity",
                   NIGHTJAR_SERVICE_FIELD(daemon.outbox_capacity),
                   Closed(0, 16777216),
                   "messages",
                   "QoS >= 1 publishes kept while the broker is away; oldest dropped when full",
                   {}},
    ServiceKeySpec{
        "daemon.state_dir",
        NIGHTJAR_SERVICE_FIELD(daemon.state_dir),
        None(),
        "",
        "folder of channel checkpoints, written on stop and every checkpoint_interval_s, "
        "loaded at start; empty = no checkpoints",
        {}},
    ServiceKeySpec{
        "daemon.checkpoint_interval_s",
        NIGHTJAR_SERVICE_FIELD(daemon.checkpoint_interval_s),
        Above(0),
        "s",
        "time between two checkpoints of every channel to state_dir (also written on stop)",
        {}},
    ServiceKeySpec{
        "daemon.metrics_listen",
        NIGHTJAR_SERVICE_FIELD(daemon.metrics_listen),
        None(),
        "",
        "IPv4:PORT to serve OpenMetrics text at /metrics (e.g. 127.0.0.1:9464); empty = off",
        {}},
    ServiceKeySpec{"daemon.publish_interval_s",
                   NIGHTJAR_SERVICE_FIELD(daemon.publish_interval_s),
                   Closed(0.1, 86400),
                   "s",
                   "least time between two state updates of one channel, and the status period",
                   {}},
};

#define NIGHTJAR_SUBSCRIPTION_FIELD(member) \
  +[](SubscriptionConfig& s) -> std::string* { return &s.member; }

const std::array kSubscriptionKeys = {
    SubscriptionKeySpec{"topic",
                        NIGHTJAR_SUBSCRIPTION_FIELD(topic),
                        "topic pattern, e.g. \"brackwater/{area}/{asset}/{signal}\"",
                        {},
                        true},
    SubscriptionKeySpec{"channel",
                        NIGHTJAR_SUBSCRIPTION_FIELD(channel),
                        "channel template, e.g. \"{area}.{asset}.{signal}\"",
                        {},
                        true},
    SubscriptionKeySpec{"payload", NIGHTJAR_SUBSCRIPTION_FIELD(payload),
                        "plain (the payload is a number) or json", kPayloads, false},
    SubscriptionKeySpec{"value_field",
                        NIGHTJAR_SUBSCRIPTION_FIELD(value_field),
                        "json: dotted path of the value",
                        {},
                        false},
    SubscriptionKeySpec{"time_field",
                        NIGHTJAR_SUBSCRIPTION_FIELD(time_field),
                        "json: dotted path of the sample time; empty = arrival time",
                        {},
                        false},
    SubscriptionKeySpec{"time_unit", NIGHTJAR_SUBSCRIPTION_FIELD(time_unit),
                        "how time_field is written: iso8601, epoch_s or epoch_ms", kTimeUnits,
                        false},
};

#undef NIGHTJAR_SERVICE_FIELD
#undef NIGHTJAR_SUBSCRIPTION_FIELD

}  // namespace

ValueType ServiceKeySpec::type() const {
  ServiceConfig probe;
  switch (field(probe).index()) {
    case 0:
      return ValueType::kString;
    case 1:
      return ValueType::kBool;
    case 2:
      return ValueType::kInt;
    default:
      return ValueType::kDouble;
  }
}

std::string_view ServiceKeySpec::section() const { return path.substr(0, path.find('.')); }

std::string_view ServiceKeySpec::name() const { return path.substr(path.find('.') + 1); }

std::span<const ServiceKeySpec> ServiceKeys() { return kServiceKeys; }

const ServiceKeySpec* FindServiceKey(std::string_view path) {
  for (const ServiceKeySpec& key : kServiceKeys) {
    if (key.path == path) return &key;
  }
  return nullptr;
}

std::span<const SubscriptionKeySpec> SubscriptionKeys() { return kSubscriptionKeys; }

const SubscriptionKeySpec* FindSubscriptionKey(std::string_view name) {
  for (const SubscriptionKeySpec& key : kSubscriptionKeys) {
    if (key.name == name) return &key;
  }
  return nullptr;
}

Value DefaultServiceValue(const ServiceKeySpec& key) {
  ServiceConfig config;
  return std::visit([](auto* field) { return Value(*field); }, key.field(config));
}

Value DefaultSubscriptionValue(const SubscriptionKeySpec& key) {
  SubscriptionConfig entry;
  return Value(*key.field(entry));
}

std::vector<std::string> ChangedServiceKeys(const ServiceConfig& a, const ServiceConfig& b) {
  ServiceConfig x = a;
  ServiceConfig y = b;
  std::vector<std::string> changed;
  bool subscriptions_listed = false;
  const auto note_subscriptions = [&] {
    if (!subscriptions_listed) changed.emplace_back("mqtt.subscriptions");
    subscriptions_listed = true;
  };
  for (const ServiceKeySpec& key : kServiceKeys) {
    const auto value = [&key](ServiceConfig& c) {
      return std::visit([](auto* field) { return Value(*field); }, key.field(c));
    };
    if (FormatValue(value(x)) != FormatValue(value(y))) changed.emplace_back(key.path);
    // The list sits after the other mqtt: keys in the table's (struct) order.
    if (key.path == "mqtt.reply_topic" &&
        !(x.mqtt.subscriptions.size() == y.mqtt.subscriptions.size() &&
          std::equal(x.mqtt.subscriptions.begin(), x.mqtt.subscriptions.end(),
                     y.mqtt.subscriptions.begin(),
                     [](SubscriptionConfig& p, SubscriptionConfig& q) {
                       for (const SubscriptionKeySpec& sub : kSubscriptionKeys) {
                         if (*sub.field(p) != *sub.field(q)) return false;
                       }
                       return true;
                     }))) {
      note_subscriptions();
    }
  }
  return changed;
}

bool SameServiceConfig(const ServiceConfig& a, const ServiceConfig& b) {
  ServiceConfig x = a;
  ServiceConfig y = b;
  for (const ServiceKeySpec& key : kServiceKeys) {
    const auto value = [&key](ServiceConfig& c) {
      return std::visit([](auto* field) { return Value(*field); }, key.field(c));
    };
    if (FormatValue(value(x)) != FormatValue(value(y))) return false;
  }
  if (x.mqtt.subscriptions.size() != y.mqtt.subscriptions.size()) return false;
  for (std::size_t i = 0; i < x.mqtt.subscriptions.size(); ++i) {
    for (const SubscriptionKeySpec& key : kSubscriptionKeys) {
      if (*key.field(x.mqtt.subscriptions[i]) != *key.field(y.mqtt.subscriptions[i])) return false;
    }
  }
  return true;
}

void SetServiceValue(const ServiceKeySpec& key, const Value& value, ServiceConfig& config) {
  std::visit(
      [&value](auto* field) {
        using T = std::remove_pointer_t<decltype(field)>;
        const T* v = std::get_if<T>(&value);
        assert(v != nullptr);
        if (v != nullptr) *field = *v;
      },
      key.field(config));
}

}  // namespace nightjar::config
