// WorkQueue: samples bounded and refused when full (the network thread never blocks),
// control items always accepted and handed out first. (Behaviour of our own contract;
// common practice for a bounded drop-on-full hand-over.)
#include "service/work_queue.h"

#include <gtest/gtest.h>

#include <chrono>
#include <string>
#include <thread>
#include <vector>

namespace nightjar::service {
namespace {

using std::chrono::milliseconds;

TEST(WorkQueueTest, RefusesSamplesBeyondCapacityButNeverControls) {
  WorkQueue<int, std::string> queue(3);
  EXPECT_TRUE(queue.TryPush(1));
  EXPECT_TRUE(queue.TryPush(2));
  EXPECT_TRUE(queue.TryPush(3));
  EXPECT_FALSE(queue.TryPush(4));
  EXPECT_EQ(queue.size(), 3u);
  for (int i = 0; i < 10; ++i) queue.PushControl(std::string("c").append(std::to_string(i)));
  std::vector<int> samples;
  std::vector<std::string> controls;
  ASSERT_TRUE(queue.PopAll(milliseconds(0), samples, controls));
  EXPECT_EQ(samples, (std::vector<int>{1, 2, 3}));
  ASSERT_EQ(controls.size(), 10u);
  EXPECT_EQ(controls.front(), "c0");
  EXPECT_TRUE(queue.TryPush(5));  // room again
}

TEST(WorkQueueTest, PopAllWaitsForAProducer) {
  WorkQueue<int, int> queue(8);
  std::thread producer([&queue] { EXPECT_TRUE(queue.TryPush(42)); });
  std::vector<int> samples;
  std::vector<int> controls;
  // Generous deadline: PopAll returns as soon as the sample is there.
  while (samples.empty()) queue.PopAll(milliseconds(5000), samples, controls);
  producer.join();
  EXPECT_EQ(samples, (std::vector<int>{42}));
  EXPECT_FALSE(queue.PopAll(milliseconds(1), samples, controls));
  EXPECT_TRUE(samples.empty());
}

}  // namespace
}  // namespace nightjar::service
