// Counts heap allocations made by the current thread inside a scope.
//
// Linking this into a test binary replaces the global operator new, and, where the C
// library allows it, malloc, calloc, realloc, aligned_alloc, posix_memalign and
// memalign, so that every allocation (std containers, strings, and Eigen, which calls
// malloc directly) is seen. Eigen's own set_is_malloc_allowed check is compiled out
// under NDEBUG, so in Release builds this counter is the only check of Eigen's heap use.
// Used to prove that the per-sample path never allocates after a channel is created.
//
// Under a sanitizer that owns malloc (ASan, TSan, MSan, HWASan) only operator new is
// replaced: defining malloc beside the sanitizer's would take it out of the picture.
// kAllocationCounterSeesMalloc says which case a build is in.
// Thread-safety: each thread has its own count; a counter reads only its own thread's.
#pragma once

#include <cstddef>
#include <cstdlib>  // defines __GLIBC__ on glibc

#if defined(__SANITIZE_ADDRESS__) || defined(__SANITIZE_THREAD__) || defined(__SANITIZE_HWADDRESS__)
#define NIGHTJAR_SANITIZER_OWNS_MALLOC 1
#elif defined(__has_feature)
#if __has_feature(address_sanitizer) || __has_feature(thread_sanitizer) || \
    __has_feature(memory_sanitizer) || __has_feature(hwaddress_sanitizer)
#define NIGHTJAR_SANITIZER_OWNS_MALLOC 1
#endif
#endif

// glibc exports its allocator as __libc_malloc & co., so our malloc can count and then
// forward to it; other C libraries get the operator new counter only.
#if defined(__GLIBC__) && !defined(NIGHTJAR_SANITIZER_OWNS_MALLOC)
#define NIGHTJAR_ALLOCATION_COUNTER_SEES_MALLOC 1
#else
#define NIGHTJAR_ALLOCATION_COUNTER_SEES_MALLOC 0
#endif

namespace nightjar::testing {

// True if the counter sees the malloc family, not only operator new.
inline constexpr bool kAllocationCounterSeesMalloc = NIGHTJAR_ALLOCATION_COUNTER_SEES_MALLOC != 0;

class AllocationCounter {
 public:
  AllocationCounter();             // starts counting on this thread
  ~AllocationCounter() = default;  // stops counting
  AllocationCounter(const AllocationCounter&) = delete;
  AllocationCounter& operator=(const AllocationCounter&) = delete;

  // Allocations seen on this thread since construction (a realloc counts as one).
  std::size_t count() const;

 private:
  std::size_t start_;
};

}  // namespace nightjar::testing
