#include "core/ring_buffer.h"

#include <gtest/gtest.h>

#include <cstddef>
#include <string>

#include "support/allocation_counter.h"

namespace nightjar::core {
namespace {

// Every check here follows common practice for a fixed-capacity overwrite-oldest FIFO.

TEST(RingBufferTest, StartsEmpty) {
  RingBuffer<int> buffer(3);
  EXPECT_EQ(buffer.size(), 0U);      // common practice
  EXPECT_EQ(buffer.capacity(), 3U);  // common practice
  EXPECT_TRUE(buffer.empty());       // common practice
  EXPECT_FALSE(buffer.full());       // common practice
}

TEST(RingBufferTest, FillsInOrderOldestFirst) {
  RingBuffer<int> buffer(3);
  buffer.push_back(1);
  buffer.push_back(2);
  EXPECT_EQ(buffer.size(), 2U);  // common practice
  EXPECT_EQ(buffer[0], 1);       // common practice: index 0 is the oldest
  EXPECT_EQ(buffer[1], 2);       // common practice
  EXPECT_EQ(buffer.front(), 1);  // common practice
  EXPECT_EQ(buffer.back(), 2);   // common practice: back() is the newest
  buffer.push_back(3);
  EXPECT_TRUE(buffer.full());  // common practice
}

TEST(RingBufferTest, WrapAroundOverwritesOldest) {
  RingBuffer<int> buffer(3);
  for (int i = 1; i <= 7; ++i) buffer.push_back(i);  // wraps twice past the end
  ASSERT_EQ(buffer.size(), 3U);                      // common practice: size stops at capacity
  EXPECT_EQ(buffer[0], 5);      // common practice: the three newest survive, oldest first
  EXPECT_EQ(buffer[1], 6);      // common practice
  EXPECT_EQ(buffer[2], 7);      // common practice
  EXPECT_EQ(buffer.back(), 7);  // common practice
  buffer[1] = 60;               // mutable access goes to the same logical element
  EXPECT_EQ(buffer[1], 60);     // common practice
}

TEST(RingBufferTest, EveryRotationKeepsLogicalOrder) {
  // After each push, element i must be the i-th oldest of the last `capacity` pushes,
  // whatever the physical head position.
  constexpr std::size_t kCapacity = 5;
  RingBuffer<std::size_t> buffer(kCapacity);
  for (std::size_t pushed = 1; pushed <= 3 * kCapacity + 2; ++pushed) {
    buffer.push_back(pushed);
    const std::size_t expected_size = pushed < kCapacity ? pushed : kCapacity;
    ASSERT_EQ(buffer.size(), expected_size);  // common practice
    for (std::size_t i = 0; i < buffer.size(); ++i) {
      EXPECT_EQ(buffer[i], pushed - buffer.size() + 1 + i);  // common practice
    }
  }
}

TEST(RingBufferTest, ClearEmptiesAndRefillsFromSlotZero) {
  RingBuffer<int> buffer(2);
  buffer.push_back(1);
  buffer.push_back(2);
  buffer.push_back(3);
  buffer.clear();
  EXPECT_TRUE(buffer.empty());       // common practice
  EXPECT_EQ(buffer.capacity(), 2U);  // common practice: storage is kept
  buffer.push_back(9);
  EXPECT_EQ(buffer.size(), 1U);  // common practice
  EXPECT_EQ(buffer[0], 9);       // common practice
  EXPECT_EQ(buffer.back(), 9);   // common practice
}

TEST(RingBufferTest, CapacityOneKeepsNewest) {
  RingBuffer<int> buffer(1);
  buffer.push_back(1);
  buffer.push_back(2);
  EXPECT_EQ(buffer.size(), 1U);  // common practice
  EXPECT_EQ(buffer.front(), 2);  // common practice
  EXPECT_EQ(buffer.back(), 2);   // common practice
}

TEST(RingBufferTest, ZeroCapacityDropsPushes) {
  RingBuffer<int> buffer(0);
  buffer.push_back(1);
  EXPECT_EQ(buffer.size(), 0U);  // common practice: documented edge case
  EXPECT_TRUE(buffer.empty());   // common practice
  EXPECT_TRUE(buffer.full());    // common practice: size == capacity
}

TEST(RingBufferTest, MovesElementsIn) {
  RingBuffer<std::string> buffer(2);
  std::string long_text(100, 'x');
  buffer.push_back(std::move(long_text));
  buffer.push_back(std::string("b"));
  buffer.push_back(std::string("c"));
  EXPECT_EQ(buffer[0], "b");  // common practice
  EXPECT_EQ(buffer[1], "c");  // common practice
}

TEST(RingBufferTest, CopyIsIndependent) {
  RingBuffer<int> a(2);
  a.push_back(1);
  RingBuffer<int> b = a;
  b.push_back(2);
  b.push_back(3);
  EXPECT_EQ(a.size(), 1U);  // common practice: value semantics
  EXPECT_EQ(a[0], 1);       // common practice
  EXPECT_EQ(b[0], 2);       // common practice
}

TEST(RingBufferTest, OneAllocationAtConstructionNoneAfter) {
  nightjar::testing::AllocationCounter construction;
  RingBuffer<double> buffer(64);
  EXPECT_EQ(construction.count(), 1U);  // common practice: storage made once, up front
  nightjar::testing::AllocationCounter use;
  for (int i = 0; i < 1000; ++i) buffer.push_back(i * 0.5);
  double sum = 0;
  for (std::size_t i = 0; i < buffer.size(); ++i) sum += buffer[i];
  buffer.clear();
  buffer.push_back(sum);
  EXPECT_EQ(use.count(), 0U);  // common practice: no allocation on the per-sample path
}

}  // namespace
}  // namespace nightjar::core
