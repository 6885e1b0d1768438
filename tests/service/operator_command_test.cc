// Operator command parsing and replies (operator_command.h). The action names follow the
// ISA-18.2 alarm states (acknowledge, shelve); the checks are on our own wire format.
#include "service/operator_command.h"

#include <gtest/gtest.h>

#include <nlohmann/json.hpp>
#include <string>

namespace nightjar::service {
namespace {

TEST(OperatorCommandTest, ParsesAShelve) {
  const ParsedCommand p = ParseOperatorCommand(
      R"({"action":"shelve","channel":"cw2.pump_a.flow","condition":"flatline","duration_s":1800,"request_id":"op-1"})");
  ASSERT_TRUE(p.status.ok()) << p.status.message();
  EXPECT_EQ(p.command.action, CommandAction::kShelve);
  EXPECT_EQ(p.command.channel, "cw2.pump_a.flow");
  EXPECT_EQ(p.command.condition, core::AlarmCondition::kFlatline);
  EXPECT_EQ(p.command.duration_s, 1800.0);
  EXPECT_EQ(p.command.request_id, "op-1");
}

TEST(OperatorCommandTest, ConditionDefaultsToAnomaly) {
  const ParsedCommand p = ParseOperatorCommand(R"({"action":"acknowledge","channel":"c.x"})");
  ASSERT_TRUE(p.status.ok());
  EXPECT_EQ(p.command.condition, core::AlarmCondition::kAnomaly);
  EXPECT_FALSE(p.command.request_id.has_value());
}

TEST(OperatorCommandTest, ErrorsNameTheField) {
  const auto error = [](const char* json) { return ParseOperatorCommand(json).status.message(); };
  EXPECT_EQ(error("{nope"), "not JSON");
  EXPECT_EQ(error("[1]"), "expected a JSON object, got an array");
  EXPECT_EQ(error(R"({"channel":"c"})"), "field 'action': missing");
  EXPECT_EQ(error(R"({"action":"silence","channel":"c"})"),
            "field 'action': expected one of acknowledge, shelve, unshelve, got 'silence'");
  EXPECT_EQ(error(R"({"action":"acknowledge"})"), "field 'channel': missing");
  EXPECT_EQ(error(R"({"action":"acknowledge","channel":7})"),
            "field 'channel': expected a channel name, got a number");
  EXPECT_EQ(error(R"({"action":"acknowledge","channel":"c","condition":"hot"})"),
            "field 'condition': expected one of anomaly, not_finite, range, flatline, gap, got "
            "'hot'");
  EXPECT_EQ(error(R"({"action":"shelve","channel":"c"})"),
            "field 'duration_s': missing: shelve needs a duration in seconds");
  EXPECT_EQ(error(R"({"action":"shelve","channel":"c","duration_s":-5})"),
            "field 'duration_s': must be > 0, got -5");
  EXPECT_EQ(error(R"({"action":"unshelve","channel":"c","duration_s":5})"),
            "field 'duration_s': only for shelve, not unshelve");
  EXPECT_EQ(error(R"({"action":"shelve","channel":"c","duration":60})"),
            "field 'duration': unknown field (expected action, channel, condition, duration_s, "
            "request_id)");
  EXPECT_EQ(error(R"({"action":"acknowledge","channel":"c","request_id":5})"),
            "field 'request_id': expected a string, got a number");
}

TEST(OperatorCommandTest, ReplyEchoesTheRequestAndCarriesTheError) {
  const ParsedCommand bad =
      ParseOperatorCommand(R"({"action":"shelve","channel":"c.x","request_id":"r\"7"})");
  const nlohmann::json reply = nlohmann::json::parse(CommandReplyJson(bad, core::Status::Ok()));
  EXPECT_EQ(reply["request_id"], "r\"7");
  EXPECT_EQ(reply["ok"], false);
  EXPECT_EQ(reply["action"], "shelve");
  EXPECT_EQ(reply["channel"], "c.x");
  EXPECT_EQ(reply["error"], "field 'duration_s': missing: shelve needs a duration in seconds");

  const ParsedCommand good = ParseOperatorCommand(R"({"action":"acknowledge","channel":"c.x"})");
  const nlohmann::json done = nlohmann::json::parse(CommandReplyJson(good, core::Status::Ok()));
  EXPECT_TRUE(done["request_id"].is_null());
  EXPECT_EQ(done["ok"], true);
  EXPECT_EQ(done["condition"], "anomaly");
  EXPECT_TRUE(done["error"].is_null());
  const nlohmann::json failed = nlohmann::json::parse(
      CommandReplyJson(good, core::Status::NotFound("no channel named 'c.x'")));
  EXPECT_EQ(failed["ok"], false);
  EXPECT_EQ(failed["error"], "no channel named 'c.x'");

  const ParsedCommand garbage = ParseOperatorCommand("{");
  const nlohmann::json unknown =
      nlohmann::json::parse(CommandReplyJson(garbage, core::Status::Ok()));
  EXPECT_TRUE(unknown["action"].is_null());
  EXPECT_TRUE(unknown["channel"].is_null());
}

}  // namespace
}  // namespace nightjar::service
