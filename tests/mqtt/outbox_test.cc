#include "mqtt/internal/outbox.h"

#include <gtest/gtest.h>

#include <string>

namespace nightjar::mqtt::internal {
namespace {

OutboundMessage Message(int n) {
  return OutboundMessage{.topic = "brackwater/cw2/nightjar/alerts",
                         .payload = std::to_string(n),
                         .qos = 1,
                         .retain = false};
}

TEST(OutboxTest, KeepsOrderAndDropsTheOldestWhenFull) {
  Outbox outbox(3);
  for (int i = 1; i <= 5; ++i) EXPECT_EQ(outbox.Push(Message(i)), i > 3) << i;
  EXPECT_EQ(outbox.size(), 3u);
  EXPECT_EQ(outbox.dropped(), 2u);
  for (const char* want : {"3", "4", "5"}) {
    ASSERT_FALSE(outbox.empty());
    EXPECT_EQ(outbox.front().payload, want);
    outbox.PopFront();
  }
  EXPECT_TRUE(outbox.empty());
}

TEST(OutboxTest, ZeroCapacityKeepsNothing) {
  Outbox outbox(0);
  EXPECT_TRUE(outbox.Push(Message(1)));
  EXPECT_TRUE(outbox.empty());
  EXPECT_EQ(outbox.dropped(), 1u);
}

}  // namespace
}  // namespace nightjar::mqtt::internal
