// AllocationCounter is what every "does not allocate" test relies on, so it is checked
// itself: it must see operator new in every build and, outside sanitizers, the malloc
// family Eigen allocates with (Eigen's own check is compiled out under NDEBUG).
// Expected counts are from the C and C++ standards' definitions of each function
// (common practice); each result is stored through a volatile pointer so the compiler
// cannot drop an allocation whose result is unused.
#include "support/allocation_counter.h"

#include <gtest/gtest.h>

#include <Eigen/Core>
#include <array>
#include <cstdint>
#include <cstdlib>
#include <memory>
#include <new>
#include <vector>

namespace nightjar::testing {
namespace {

TEST(AllocationCounterTest, CountsOperatorNewOncePerCall) {
  AllocationCounter counter;
  void* volatile raw = ::operator new(48);
  EXPECT_EQ(counter.count(), 1u);  // once, though operator new ends in malloc
  ::operator delete(raw);
  EXPECT_EQ(counter.count(), 1u) << "a free is not an allocation";

  auto boxed = std::make_unique<int>(7);
  int* volatile kept = boxed.get();
  EXPECT_EQ(*kept, 7);
  EXPECT_EQ(counter.count(), 2u);

  std::vector<double> values(100);
  double* volatile data = values.data();
  EXPECT_NE(data, nullptr);
  EXPECT_EQ(counter.count(), 3u);
}

TEST(AllocationCounterTest, CountsOverAlignedOperatorNew) {
  struct alignas(64) Packet {
    std::array<float, 16> lanes;
  };
  AllocationCounter counter;
  auto packet = std::make_unique<Packet>();
  Packet* volatile kept = packet.get();
  EXPECT_EQ(reinterpret_cast<std::uintptr_t>(kept) % 64, 0u);
  EXPECT_EQ(counter.count(), 1u);
}

TEST(AllocationCounterTest, CountsTheMallocFamily) {
  if (!kAllocationCounterSeesMalloc) {
    GTEST_SKIP() << "a sanitizer owns malloc in this build; only operator new is counted";
  }
  AllocationCounter counter;
  void* volatile block = std::malloc(64);  // NOLINT(cppcoreguidelines-no-malloc)
  ASSERT_NE(block, nullptr);
  EXPECT_EQ(counter.count(), 1u);
  std::free(block);  // NOLINT(cppcoreguidelines-no-malloc)
  EXPECT_EQ(counter.count(), 1u) << "a free is not an allocation";

  void* volatile zeroed = std::calloc(16, sizeof(float));  // NOLINT(cppcoreguidelines-no-malloc)
  EXPECT_EQ(counter.count(), 2u);
  void* volatile grown = std::realloc(zeroed, 4096);  // NOLINT(cppcoreguidelines-no-malloc)
  ASSERT_NE(grown, nullptr);
  EXPECT_EQ(counter.count(), 3u);
  std::free(grown);  // NOLINT(cppcoreguidelines-no-malloc)

  void* volatile aligned = std::aligned_alloc(64, 256);
  EXPECT_EQ(reinterpret_cast<std::uintptr_t>(aligned) % 64, 0u);
  EXPECT_EQ(counter.count(), 4u);
  std::free(aligned);  // NOLINT(cppcoreguidelines-no-malloc)

  void* posix = nullptr;
  ASSERT_EQ(posix_memalign(&posix, 64, 256), 0);
  void* volatile kept = posix;
  EXPECT_EQ(reinterpret_cast<std::uintptr_t>(kept) % 64, 0u);
  EXPECT_EQ(counter.count(), 5u);
  std::free(posix);  // NOLINT(cppcoreguidelines-no-malloc)
  EXPECT_EQ(counter.count(), 5u);
}

TEST(AllocationCounterTest, CountsEigenHeapAllocation) {
  if (!kAllocationCounterSeesMalloc) {
    GTEST_SKIP() << "a sanitizer owns malloc in this build; Eigen's malloc is not counted";
  }
  AllocationCounter counter;
  Eigen::VectorXf v(100);  // Eigen's aligned_malloc, which calls std::malloc
  float* volatile data = v.data();
  EXPECT_NE(data, nullptr);
  EXPECT_GE(counter.count(), 1u);
}

TEST(AllocationCounterTest, StackOnlyWorkCountsNothing) {
  AllocationCounter counter;
  Eigen::Vector4f a = Eigen::Vector4f::Constant(2.0f);  // fixed size: no heap
  const float volatile sum = (a * 3.0f).sum();
  EXPECT_EQ(sum, 24.0f);
  EXPECT_EQ(counter.count(), 0u);
}

}  // namespace
}  // namespace nightjar::testing
