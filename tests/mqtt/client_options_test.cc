#include <gtest/gtest.h>
#include <mosquitto.h>

#include <string>

#include "mqtt/internal/mosquitto_status.h"
#include "mqtt/mosquitto_client.h"

namespace nightjar::mqtt {
namespace {

std::string Error(const ClientOptions& options) {
  const core::Status s = ValidateClientOptions(options);
  EXPECT_FALSE(s.ok());
  EXPECT_EQ(s.code(), core::StatusCode::kInvalidArgument);
  // Create() refuses the same options without touching the network.
  EXPECT_FALSE(MosquittoClient::Create(options).ok());
  return s.message();
}

TEST(ClientOptionsTest, DefaultsAreValid) { EXPECT_TRUE(ValidateClientOptions({}).ok()); }

TEST(ClientOptionsTest, ErrorsNameTheField) {
  ClientOptions o;
  o.port = 0;
  EXPECT_EQ(Error(o), "port: must be in 1..65535, got 0");
  o = {};
  o.host = "";
  EXPECT_EQ(Error(o), "host: empty");
  o = {};
  o.keepalive_s = 4;
  EXPECT_EQ(Error(o), "keepalive_s: must be in 5..65535, got 4");
  o = {};
  o.clean_session = false;
  EXPECT_EQ(Error(o), "client_id: needed when clean_session is false");
  o.client_id = "cw2-nightjar";
  o.protocol = MqttProtocol::kV5;
  EXPECT_EQ(Error(o).rfind("clean_session: must be true with protocol 5", 0), 0u);
  o = {};
  o.password = "secret";
  EXPECT_EQ(Error(o), "password: needs a username");
  o = {};
  o.will = MqttMessage{.topic = "brackwater/cw2/+/status", .payload = "offline", .qos = 1};
  EXPECT_EQ(Error(o),
            "will.topic 'brackwater/cw2/+/status': wildcards + and # are not allowed in a "
            "published topic");
  o.will = MqttMessage{.topic = "brackwater/cw2/nightjar/status", .payload = "offline", .qos = 3};
  EXPECT_EQ(Error(o), "will.qos: must be 0, 1 or 2, got 3");
  o = {};
  o.announce = MqttMessage{.topic = "", .payload = "online"};
  EXPECT_EQ(Error(o), "announce.topic '': empty topic");
  o = {};
  o.reconnect_min_s = 0.0;
  EXPECT_EQ(Error(o), "reconnect_min_s: must be in (0, 3600], got 0.000000");
  o = {};
  o.reconnect_min_s = 5.0;
  o.reconnect_max_s = 1.0;
  EXPECT_EQ(Error(o), "reconnect_max_s: must be in [reconnect_min_s, 3600], got 1.000000");
  o = {};
  o.stop_drain_s = -1.0;
  EXPECT_EQ(Error(o), "stop_drain_s: must be in [0, 60], got -1.000000");
}

TEST(ClientOptionsTest, BadTopicsAndFiltersAreRefusedNamingThem) {
  auto client = MosquittoClient::Create({});
  ASSERT_TRUE(client.ok()) << client.status().message();
  MosquittoClient& c = **client;
  EXPECT_EQ(c.Publish("brackwater/cw2/#", "1", 1, false).message(),
            "topic brackwater/cw2/#: cannot publish: wildcards + and # are not allowed in a "
            "published topic");
  EXPECT_EQ(c.Publish("brackwater/cw2/nightjar/alerts", "1", 3, false).message(),
            "topic brackwater/cw2/nightjar/alerts: QoS 3: must be 0, 1 or 2");
  EXPECT_EQ(c.Publish("", "1", 1, false).message(), "topic : cannot publish: empty topic");
  EXPECT_EQ(c.Subscribe("brackwater/cw2#", 1).message(),
            "subscription filter 'brackwater/cw2#': '+' and '#' must each be a whole level, and "
            "'#' the last");
  EXPECT_EQ(c.Subscribe("brackwater/#/flow", 1).message(),
            "subscription filter 'brackwater/#/flow': '+' and '#' must each be a whole level, and "
            "'#' the last");
  EXPECT_EQ(c.Subscribe("brackwater/+/flow", -1).message(),
            "subscription filter 'brackwater/+/flow': QoS -1 must be 0, 1 or 2");
  EXPECT_TRUE(c.Subscribe("brackwater/+/+/+", 1).ok());
  // Before Start(): QoS 1 waits in the outbox, QoS 0 is dropped and counted.
  EXPECT_TRUE(c.Publish("brackwater/cw2/nightjar/alerts", "a", 1, false).ok());
  EXPECT_EQ(c.Publish("brackwater/cw2/nightjar/alerts", "b", 0, false).code(),
            core::StatusCode::kUnavailable);
  const BusStats stats = c.stats();
  EXPECT_EQ(stats.outbox_size, 1u);
  EXPECT_EQ(stats.publish_dropped, 1u);
  EXPECT_FALSE(stats.connected);
  c.Stop();
  EXPECT_EQ(c.Start().code(), core::StatusCode::kFailedPrecondition);
  EXPECT_EQ(c.Publish("brackwater/cw2/nightjar/alerts", "a", 1, false).code(),
            core::StatusCode::kFailedPrecondition);
}

TEST(MosquittoStatusTest, MapsCodesWithLibmosquittoText) {
  EXPECT_TRUE(internal::MosquittoStatus(MOSQ_ERR_SUCCESS, "x").ok());
  const core::Status refused = internal::MosquittoStatus(MOSQ_ERR_CONN_REFUSED, "connecting");
  EXPECT_EQ(refused.code(), core::StatusCode::kUnavailable);
  EXPECT_EQ(refused.message(),
            std::string("connecting: ") + mosquitto_strerror(MOSQ_ERR_CONN_REFUSED));
  EXPECT_EQ(internal::MosquittoStatus(MOSQ_ERR_INVAL, "x").code(),
            core::StatusCode::kInvalidArgument);
  EXPECT_EQ(internal::MosquittoStatus(MOSQ_ERR_PAYLOAD_SIZE, "x").code(),
            core::StatusCode::kInvalidArgument);
  EXPECT_EQ(internal::MosquittoStatus(MOSQ_ERR_AUTH, "x").code(),
            core::StatusCode::kFailedPrecondition);
  EXPECT_EQ(internal::MosquittoStatus(MOSQ_ERR_NOMEM, "x").code(), core::StatusCode::kInternal);
}

}  // namespace
}  // namespace nightjar::mqtt
