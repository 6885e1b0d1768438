// The mqtt: and daemon: sections: defaults, every key read into ServiceConfig, unknown keys,
// wrong types, bad choices and cross-key rules reported with file:line:col and key path.
// Defaults and bounds are nightjar's own choices (common practice for an MQTT client:
// port 1883 is the IANA-registered MQTT port, keepalive 30 s).
#include "config/service_config.h"

#include <gtest/gtest.h>

#include <string>
#include <string_view>
#include <vector>

#include "config/config.h"

namespace nightjar::config {
namespace {

LoadResult Load(std::string_view yaml) { return LoadConfigString(yaml, "plant.yaml"); }

std::string AllErrors(const LoadResult& r) {
  std::string out;
  for (const ConfigError& e : r.errors) out += e.ToString() + "\n";
  return out;
}

TEST(ServiceConfigTest, EmptyFileGivesTheDefaults) {
  const LoadResult r = Load("");
  ASSERT_TRUE(r.ok()) << AllErrors(r);
  const ServiceConfig& s = r.config->service;
  EXPECT_EQ(s.mqtt.host, "127.0.0.1");
  EXPECT_EQ(s.mqtt.port, 1883);
  EXPECT_EQ(s.mqtt.protocol, "3.1.1");
  EXPECT_TRUE(s.mqtt.subscriptions.empty());
  EXPECT_EQ(s.daemon.workers, 1);
  EXPECT_EQ(s.daemon.metrics_listen, "");
}

TEST(ServiceConfigTest, ReadsEveryKey) {
  const LoadResult r = Load(
      "mqtt:\n"
      "  host: broker.cw2\n"
      "  port: 8883\n"
      "  client_id: nightjar-cw2\n"
      "  keepalive_s: 15\n"
      "  clean_session: false\n"
      "  protocol: 3.1.1\n"
      "  username: nj\n"
      "  password_file: /etc/nightjar/password\n"
      "  qos: 2\n"
      "  alert_prefix: brackwater/cw2/alert\n"
      "  state_prefix: brackwater/cw2/state\n"
      "  status_topic: brackwater/cw2/nightjar\n"
      "  command_topic: brackwater/cw2/command\n"
      "  reply_topic: brackwater/cw2/reply\n"
      "  subscriptions:\n"
      "    - topic: \"brackwater/{area}/{asset}/{signal}\"\n"
      "      channel: \"{area}.{asset}.{signal}\"\n"
      "    - topic: \"plant/{tag}\"\n"
      "      channel: \"cw2.{tag}\"\n"
      "      payload: json\n"
      "      value_field: data.v\n"
      "      time_field: ts\n"
      "      time_unit: epoch_ms\n"
      "daemon:\n"
      "  workers: 4\n"
      "  queue_capacity: 1024\n"
      "  outbox_capacity: 50\n"
      "  state_dir: /var/lib/nj\n"
      "  checkpoint_interval_s: 60\n"
      "  metrics_listen: 127.0.0.1:9300\n"
      "  publish_interval_s: 1.5\n");
  ASSERT_TRUE(r.ok()) << AllErrors(r);
  const MqttConfig& m = r.config->service.mqtt;
  EXPECT_EQ(m.host, "broker.cw2");
  EXPECT_EQ(m.port, 8883);
  EXPECT_EQ(m.client_id, "nightjar-cw2");
  EXPECT_EQ(m.keepalive_s, 15);
  EXPECT_FALSE(m.clean_session);
  EXPECT_EQ(m.username, "nj");
  EXPECT_EQ(m.password_file, "/etc/nightjar/password");
  EXPECT_EQ(m.qos, 2);
  EXPECT_EQ(m.alert_prefix, "brackwater/cw2/alert");
  EXPECT_EQ(m.state_prefix, "brackwater/cw2/state");
  EXPECT_EQ(m.status_topic, "brackwater/cw2/nightjar");
  EXPECT_EQ(m.command_topic, "brackwater/cw2/command");
  EXPECT_EQ(m.reply_topic, "brackwater/cw2/reply");
  ASSERT_EQ(m.subscriptions.size(), 2u);
  EXPECT_EQ(m.subscriptions[0].topic, "brackwater/{area}/{asset}/{signal}");
  EXPECT_EQ(m.subscriptions[0].payload, "plain");
  EXPECT_EQ(m.subscriptions[0].line, 17);
  EXPECT_EQ(m.subscriptions[1].channel, "cw2.{tag}");
  EXPECT_EQ(m.subscriptions[1].payload, "json");
  EXPECT_EQ(m.subscriptions[1].value_field, "data.v");
  EXPECT_EQ(m.subscriptions[1].time_field, "ts");
  EXPECT_EQ(m.subscriptions[1].time_unit, "epoch_ms");
  const DaemonConfig& d = r.config->service.daemon;
  EXPECT_EQ(d.workers, 4);
  EXPECT_EQ(d.queue_capacity, 1024);
  EXPECT_EQ(d.outbox_capacity, 50);
  EXPECT_EQ(d.state_dir, "/var/lib/nj");
  EXPECT_EQ(d.checkpoint_interval_s, 60.0);
  EXPECT_EQ(d.metrics_listen, "127.0.0.1:9300");
  EXPECT_EQ(d.publish_interval_s, 1.5);
}

TEST(ServiceConfigTest, ErrorsNameFileLineColumnAndKeyPath) {
  const LoadResult r = Load(
      "mqtt:\n"
      "  prot: 5\n"
      "  port: 70000\n"
      "  protocol: 4\n"
      "  subscriptions:\n"
      "    - topic: \"a/{x}\"\n"
      "      chanel: \"{x}\"\n"
      "    - channel: c\n"
      "      value_field: v\n"
      "daemon:\n"
      "  workers: \"2\"\n"
      "  sharding: hash\n");
  ASSERT_EQ(r.errors.size(), 9u) << AllErrors(r);
  EXPECT_EQ(r.errors[0].ToString(), "plant.yaml:2:3: mqtt.prot: unknown key; did you mean 'port'?");
  EXPECT_EQ(r.errors[1].ToString(), "plant.yaml:3:9: mqtt.port: must be in [1, 65535], got 70000");
  EXPECT_EQ(r.errors[2].ToString(),
            "plant.yaml:4:13: mqtt.protocol: expected one of 3.1.1, 5, got '4'");
  EXPECT_EQ(r.errors[3].ToString(),
            "plant.yaml:6:7: mqtt.subscriptions[0].channel: missing: every subscription needs it");
  EXPECT_EQ(r.errors[4].ToString(),
            "plant.yaml:7:7: mqtt.subscriptions[0].chanel: unknown key; did you mean 'channel'?");
  EXPECT_EQ(r.errors[5].ToString(),
            "plant.yaml:8:7: mqtt.subscriptions[1].topic: missing: every subscription needs it");
  EXPECT_EQ(r.errors[6].ToString(),
            "plant.yaml:9:20: mqtt.subscriptions[1].value_field: only for payload: json (this "
            "subscription's payload is plain)");
  EXPECT_EQ(r.errors[7].key_path, "daemon.workers");
  EXPECT_NE(AllErrors(r).find("plant.yaml:12:3: daemon.sharding: unknown key"), std::string::npos);
}

TEST(ServiceConfigTest, CrossKeyRules) {
  const LoadResult r = Load(
      "mqtt:\n"
      "  password_file: /p\n"
      "  protocol: 5\n"
      "  clean_session: false\n"
      "  alert_prefix: \"a/#\"\n");
  ASSERT_EQ(r.errors.size(), 3u) << AllErrors(r);
  EXPECT_EQ(r.errors[0].ToString(), "plant.yaml:2:18: mqtt.password_file: needs mqtt.username");
  EXPECT_EQ(r.errors[1].key_path, "mqtt.clean_session");
  EXPECT_EQ(r.errors[1].line, 4);
  EXPECT_EQ(r.errors[2].key_path, "mqtt.alert_prefix");
  EXPECT_EQ(r.errors[2].line, 5);
}

TEST(ServiceConfigTest, SameServiceConfigSeesEveryKeyAndSubscription) {
  const ServiceConfig base;
  EXPECT_TRUE(SameServiceConfig(base, base));
  for (const ServiceKeySpec& key : ServiceKeys()) {
    ServiceConfig changed = base;
    const Value v = DefaultServiceValue(key);
    Value other = v;
    if (const auto* s = std::get_if<std::string>(&v)) other = *s + "x";
    if (const auto* b = std::get_if<bool>(&v)) other = !*b;
    if (const auto* i = std::get_if<int>(&v)) other = *i + 1;
    if (const auto* d = std::get_if<double>(&v)) other = *d + 1.0;
    SetServiceValue(key, other, changed);
    EXPECT_FALSE(SameServiceConfig(base, changed)) << key.path;
  }
  ServiceConfig one = base;
  one.mqtt.subscriptions.push_back(SubscriptionConfig{});
  EXPECT_FALSE(SameServiceConfig(base, one));
  ServiceConfig other = one;
  other.mqtt.subscriptions[0].time_unit = "epoch_ms";
  EXPECT_FALSE(SameServiceConfig(one, other));
  other.mqtt.subscriptions[0].line = 99;  // where it was written does not matter
  other.mqtt.subscriptions[0].time_unit = one.mqtt.subscriptions[0].time_unit;
  EXPECT_TRUE(SameServiceConfig(one, other));
}

// What a reload compares: every key by its path, the subscription list as one path.
TEST(ServiceConfigTest, ChangedServiceKeysNamesEachChangedKeyPath) {
  const ServiceConfig base;
  EXPECT_TRUE(ChangedServiceKeys(base, base).empty());
  for (const ServiceKeySpec& key : ServiceKeys()) {
    ServiceConfig changed = base;
    const Value v = DefaultServiceValue(key);
    Value other = v;
    if (const auto* s = std::get_if<std::string>(&v)) other = *s + "x";
    if (const auto* b = std::get_if<bool>(&v)) other = !*b;
    if (const auto* i = std::get_if<int>(&v)) other = *i + 1;
    if (const auto* d = std::get_if<double>(&v)) other = *d + 1.0;
    SetServiceValue(key, other, changed);
    EXPECT_EQ(ChangedServiceKeys(base, changed), std::vector<std::string>{std::string(key.path)});
  }
  ServiceConfig two = base;
  two.mqtt.keepalive_s = 7;
  two.daemon.workers = 4;
  two.mqtt.subscriptions.push_back(SubscriptionConfig{});
  EXPECT_EQ(ChangedServiceKeys(base, two),
            (std::vector<std::string>{"mqtt.keepalive_s", "mqtt.subscriptions", "daemon.workers"}));
  ServiceConfig moved = two;
  moved.mqtt.subscriptions[0].line = 40;  // where it was written does not matter
  EXPECT_TRUE(ChangedServiceKeys(two, moved).empty());
}

TEST(ServiceConfigTest, ReferenceYamlListsEveryServiceKey) {
  const std::string yaml = RenderReferenceYaml();
  for (const ServiceKeySpec& key : ServiceKeys()) {
    const std::string line =
        "  " + std::string(key.name()) + ": " + FormatValue(DefaultServiceValue(key)) + "  # ";
    EXPECT_NE(yaml.find(line), std::string::npos) << key.path;
    if (!key.unit.empty()) {
      EXPECT_NE(yaml.find(line + "[" + std::string(key.unit) + "]"), std::string::npos) << key.path;
    }
  }
  for (const SubscriptionKeySpec& key : SubscriptionKeys()) {
    EXPECT_NE(yaml.find("  #   " + std::string(key.name) + ": "), std::string::npos) << key.name;
  }
}

}  // namespace
}  // namespace nightjar::config
