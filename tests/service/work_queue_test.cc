// WorkQueue: samples bounded and refused when full (the network thread never blocks),
// control items always accepted and handed out first. (Behaviour of our own contract;
// common practice for a bounded drop-on-full hand-over.)
#include "service/work_queue.h"

#include <gtest/gtest.h>

#include <atomic>
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

TEST(WorkQueueTest, BatchesTakeWhatFitsFromTheFront) {
  WorkQueue<std::string, int> queue(4);
  EXPECT_TRUE(queue.TryPush("a"));
  std::vector<std::string> batch = {"b", "c", "d", "e", "f"};
  EXPECT_EQ(queue.TryPushBatch(batch), 3u);
  ASSERT_EQ(batch.size(), 5u);
  EXPECT_EQ(batch[3], "e");  // refused ones are left as they were
  EXPECT_EQ(batch[4], "f");
  std::vector<std::string> full = {"g"};
  EXPECT_EQ(queue.TryPushBatch(full), 0u);
  EXPECT_EQ(full[0], "g");
  std::vector<std::string> samples;
  std::vector<int> controls;
  ASSERT_TRUE(queue.PopAll(milliseconds(0), samples, controls));
  EXPECT_EQ(samples, (std::vector<std::string>{"a", "b", "c", "d"}));
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

// Only a push onto an empty queue notifies the consumer; every burst after a drain must
// still wake it. The consumer waits far longer (60 s) than the test's deadline for each
// burst (20 s), so a missed wake-up fails the deadline instead of passing late.
TEST(WorkQueueTest, EveryBurstAfterADrainWakesTheConsumer) {
  WorkQueue<int, int> queue(64);
  std::atomic<int> taken{0};
  std::atomic<int> controls_taken{0};
  std::atomic<bool> done{false};
  std::thread consumer([&] {
    std::vector<int> samples;
    std::vector<int> controls;
    while (!done.load()) {
      queue.PopAll(milliseconds(60'000), samples, controls);
      taken += static_cast<int>(samples.size());
      controls_taken += static_cast<int>(controls.size());
    }
  });
  const auto wait_for = [](const auto& condition) {
    const auto deadline = std::chrono::steady_clock::now() + std::chrono::seconds(20);
    while (!condition()) {
      if (std::chrono::steady_clock::now() > deadline) return false;
      std::this_thread::yield();
    }
    return true;
  };
  for (int burst = 0; burst < 5; ++burst) {
    for (int i = 0; i < 10; ++i) EXPECT_TRUE(queue.TryPush(burst * 10 + i));
    if (!wait_for([&] { return taken.load() == (burst + 1) * 10; })) {
      ADD_FAILURE() << "burst " << burst << " did not wake the consumer";
      break;
    }
    queue.PushControl(burst);  // a control item alone on an empty queue wakes it too
    if (!wait_for([&] { return controls_taken.load() == burst + 1; })) {
      ADD_FAILURE() << "control " << burst << " did not wake the consumer";
      break;
    }
  }
  done.store(true);
  queue.PushControl(-1);  // the last wake-up (the consumer exits within 60 s regardless)
  consumer.join();
  EXPECT_EQ(queue.size(), 0u);
}

}  // namespace
}  // namespace nightjar::service
