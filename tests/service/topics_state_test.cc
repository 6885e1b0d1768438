// Topic names and the retained JSON bodies (topics.h, state_json.h), parsed back with
// nlohmann-json as the independent reader.
#include <gtest/gtest.h>

#include <limits>
#include <nlohmann/json.hpp>
#include <string>

#include "service/state_json.h"
#include "service/topics.h"

namespace nightjar::service {
namespace {

TEST(TopicsTest, DotsBecomeLevels) {
  EXPECT_EQ(ChannelTopic("nightjar/alert", "cw2.pump_a.flow"), "nightjar/alert/cw2/pump_a/flow");
  EXPECT_EQ(ChannelTopic("a", "x"), "a/x");
}

TEST(StateJsonTest, ChannelStateReadsBack) {
  core::ChannelStatus status;
  status.state = core::ChannelState::kInAlarm;
  status.samples = 5400;
  status.last_value = 101.25;
  status.last_expected = 96.5;
  status.last_z = std::numeric_limits<double>::quiet_NaN();
  std::string out = "stale text";
  // 1780000000 s = 2026-05-28T20:26:40Z (date -u -d @1780000000).
  ChannelStateJson("cw2.pump_a.flow", status, 1'780'000'000'250'000, &out);
  const nlohmann::json j = nlohmann::json::parse(out);
  EXPECT_EQ(j["channel"], "cw2.pump_a.flow");
  EXPECT_EQ(j["state"], "in_alarm");
  EXPECT_EQ(j["ts"], "2026-05-28T20:26:40.250Z");
  EXPECT_EQ(j["value"], 101.25);
  EXPECT_EQ(j["expected"], 96.5);
  EXPECT_TRUE(j["z"].is_null());
  EXPECT_EQ(j["samples"], 5400);
  EXPECT_EQ(j["relearns"], 0);
  EXPECT_FALSE(j.contains("relearning"));
}

TEST(StateJsonTest, ARelearningChannelSaysSo) {
  core::ChannelStatus status;
  status.state = core::ChannelState::kLearning;
  status.relearning = true;
  status.relearns = 2;
  std::string out;
  ChannelStateJson("cw2.pump_a.flow", status, 1'780'000'000'000'000, &out);
  const nlohmann::json j = nlohmann::json::parse(out);
  EXPECT_EQ(j["state"], "learning");
  EXPECT_EQ(j["relearning"], true);
  EXPECT_EQ(j["relearns"], 2);
}

TEST(StateJsonTest, StatusCarriesStateReasonAndCounters) {
  StatusCounters c;
  c.workers = 2;
  c.samples = 7;
  c.dropped = 3;
  const nlohmann::json online = nlohmann::json::parse(
      StatusJson("online", "", 1'780'000'000'000'000, 1'780'000'001'000'000, c));
  EXPECT_EQ(online["state"], "online");
  EXPECT_FALSE(online.contains("reason"));
  EXPECT_EQ(online["since"], "2026-05-28T20:26:40.000Z");
  EXPECT_EQ(online["updated"], "2026-05-28T20:26:41.000Z");
  EXPECT_EQ(online["workers"], 2);
  EXPECT_EQ(online["samples"], 7);
  EXPECT_EQ(online["dropped"], 3);
  const nlohmann::json offline = nlohmann::json::parse(StatusJson("offline", "stopped", 0, 0, c));
  EXPECT_EQ(offline["reason"], "stopped");
}

}  // namespace
}  // namespace nightjar::service
