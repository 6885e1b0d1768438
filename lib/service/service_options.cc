#include "service/service_options.h"

#include <cerrno>
#include <charconv>
#include <cstring>
#include <fstream>
#include <string>

#include "mqtt/payload.h"
#include "mqtt/topic_mapping.h"

namespace nightjar::service {
namespace {

std::string Where(std::string_view source, int line, int column, const std::string& key) {
  std::string out(source);
  if (line > 0)
    out.append(":").append(std::to_string(line)).append(":").append(std::to_string(column));
  return out.append(": ").append(key).append(": ");
}

mqtt::PayloadFormat FormatOf(const config::SubscriptionConfig& s) {
  mqtt::PayloadFormat format;
  format.encoding =
      s.payload == "json" ? mqtt::PayloadEncoding::kJson : mqtt::PayloadEncoding::kNumber;
  if (format.encoding == mqtt::PayloadEncoding::kJson) {
    format.value_field = s.value_field;
    format.time_field = s.time_field;
    format.time_encoding = s.time_unit == "epoch_s"    ? mqtt::TimeEncoding::kEpochSeconds
                           : s.time_unit == "epoch_ms" ? mqtt::TimeEncoding::kEpochMillis
                                                       : mqtt::TimeEncoding::kIso8601;
  }
  return format;
}

// "'<text>': <what>", built by appending (GCC 12 warns falsely, -Wrestrict, on
// "literal" + std::string).
core::Status BadAddress(std::string_view text, std::string_view what) {
  return core::Status::InvalidArgument(std::string("'").append(text).append("': ").append(what));
}

}  // namespace

core::Status ParseBrokerAddress(std::string_view text, std::string* host, int* port) {
  std::string_view h = text;
  std::string_view p;
  if (!text.empty() && text.front() == '[') {
    const std::size_t close = text.find(']');
    if (close == std::string_view::npos) {
      return BadAddress(text, "'[' without ']'");
    }
    h = text.substr(1, close - 1);
    const std::string_view rest = text.substr(close + 1);
    if (!rest.empty()) {
      if (rest.front() != ':') {
        return BadAddress(text, "expected ':' after ']'");
      }
      p = rest.substr(1);
    }
  } else if (const std::size_t colon = text.rfind(':'); colon != std::string_view::npos) {
    h = text.substr(0, colon);
    p = text.substr(colon + 1);
  }
  if (h.empty()) return BadAddress(text, "no host");
  *host = std::string(h);
  if (p.empty()) return core::Status::Ok();
  int value = 0;
  const auto [end, ec] = std::from_chars(p.data(), p.data() + p.size(), value);
  if (ec != std::errc() || end != p.data() + p.size() || value < 1 || value > 65535) {
    return BadAddress(text, "port must be a number in 1..65535");
  }
  *port = value;
  return core::Status::Ok();
}

core::Result<ServiceOptions> BuildServiceOptions(const config::LoadedConfig& config,
                                                 std::string_view source,
                                                 const std::optional<std::string>& broker) {
  const config::MqttConfig& m = config.service.mqtt;
  const config::DaemonConfig& d = config.service.daemon;
  std::string errors;
  ServiceOptions o;
  o.client.host = m.host;
  o.client.port = m.port;
  if (broker) {
    if (core::Status s = ParseBrokerAddress(*broker, &o.client.host, &o.client.port); !s.ok()) {
      errors.append("--broker ").append(s.message()).append("\n");
    }
  }
  o.client.client_id = m.client_id;
  o.client.keepalive_s = m.keepalive_s;
  o.client.clean_session = m.clean_session;
  o.client.protocol = m.protocol == "5" ? mqtt::MqttProtocol::kV5 : mqtt::MqttProtocol::kV311;
  if (!m.username.empty()) o.client.username = m.username;
  if (!m.password_file.empty()) {
    std::ifstream in(m.password_file);
    std::string password;
    if (!in || !std::getline(in, password)) {
      errors += Where(source, 0, 0, "mqtt.password_file") + "cannot read '" + m.password_file +
                "': " + std::strerror(errno) + "\n";
    } else {
      if (!password.empty() && password.back() == '\r') password.pop_back();
      o.client.password = password;
    }
  }
  o.client.will = mqtt::MqttMessage{
      m.status_topic, R"({"state":"offline","reason":"connection lost"})", m.qos, true};
  o.client.announce = mqtt::MqttMessage{m.status_topic, R"({"state":"online"})", m.qos, true};
  o.client.outbox_capacity = static_cast<std::size_t>(d.outbox_capacity);
  if (core::Status s = mqtt::ValidateClientOptions(o.client); !s.ok()) {
    errors += Where(source, 0, 0, "mqtt") + s.message() + "\n";
  }

  if (m.subscriptions.empty()) {
    errors += Where(source, 0, 0, "mqtt.subscriptions") +
              "nightjar run needs at least one subscription (where samples come from)\n";
  }
  for (std::size_t i = 0; i < m.subscriptions.size(); ++i) {
    const config::SubscriptionConfig& s = m.subscriptions[i];
    const std::string key =
        std::string("mqtt.subscriptions[").append(std::to_string(i)).append("]");
    core::Result<mqtt::TopicPattern> pattern = mqtt::TopicPattern::Create(s.topic, s.channel);
    if (!pattern.ok()) {
      errors += Where(source, s.line, s.column, key) + pattern.status().message() + "\n";
      continue;
    }
    if (pattern->filter() == m.command_topic) {
      errors += Where(source, s.line, s.column, key + ".topic") +
                "is the command topic; samples and commands need their own topics\n";
    }
    mqtt::IntakeRule rule{s.topic, s.channel, FormatOf(s), 1};
    if (core::Status v = mqtt::ValidatePayloadFormat(rule.payload); !v.ok()) {
      errors += Where(source, s.line, s.column, key) + v.message() + "\n";
      continue;
    }
    o.intake.rules.push_back(std::move(rule));
  }

  o.state_dir = d.state_dir;
  o.checkpoint_interval_s = d.checkpoint_interval_s;
  o.alert_prefix = m.alert_prefix;
  o.state_prefix = m.state_prefix;
  o.status_topic = m.status_topic;
  o.command_topic = m.command_topic;
  o.reply_topic = m.reply_topic;
  o.qos = m.qos;
  o.workers = d.workers;
  o.queue_capacity = static_cast<std::size_t>(d.queue_capacity);
  o.publish_interval_s = d.publish_interval_s;
  if (!d.metrics_listen.empty()) {
    core::Result<ListenAddress> listen = ParseListenAddress(d.metrics_listen);
    if (listen.ok()) {
      o.metrics_listen = std::move(listen).value();
    } else {
      errors += Where(source, 0, 0, "daemon.metrics_listen") + listen.status().message() + "\n";
    }
  }
  if (!errors.empty()) {
    errors.pop_back();
    return core::Status::InvalidArgument(errors);
  }
  return o;
}

}  // namespace nightjar::service
