#include "support/allocation_counter.h"

#include <cerrno>
#include <cstdlib>
#include <new>

namespace {
// constinit: malloc may run before any constructor (dynamic loader, static init).
constinit thread_local std::size_t allocations_on_thread = 0;

void Count() { ++allocations_on_thread; }

// operator new ends in malloc; where malloc counts, counting here too would count twice.
void CountInNew() {
  if constexpr (!nightjar::testing::kAllocationCounterSeesMalloc) Count();
}

// aligned_alloc wants a size that is a non-zero multiple of the alignment.
std::size_t RoundUp(std::size_t size, std::size_t alignment) {
  return size == 0 ? alignment : (size + alignment - 1) / alignment * alignment;
}
}  // namespace

#if NIGHTJAR_ALLOCATION_COUNTER_SEES_MALLOC
// glibc's allocator under its exported internal names: our malloc family counts, then
// forwards to it, so pointers from either side can be freed by the other.
// NOLINTBEGIN(bugprone-reserved-identifier,readability-identifier-naming)
extern "C" {
void* __libc_malloc(std::size_t size);
void* __libc_calloc(std::size_t count, std::size_t size);
void* __libc_realloc(void* p, std::size_t size);
void* __libc_memalign(std::size_t alignment, std::size_t size);
void __libc_free(void* p);
}
// NOLINTEND(bugprone-reserved-identifier,readability-identifier-naming)

extern "C" {
void* malloc(std::size_t size) noexcept {
  Count();
  return __libc_malloc(size);
}
void* calloc(std::size_t count, std::size_t size) noexcept {
  Count();
  return __libc_calloc(count, size);
}
// Counted unless it only frees (size 0): growing may move the block.
void* realloc(void* p, std::size_t size) noexcept {
  if (size != 0 || p == nullptr) Count();
  return __libc_realloc(p, size);
}
void* aligned_alloc(std::size_t alignment, std::size_t size) noexcept {
  Count();
  return __libc_memalign(alignment, size);
}
void* memalign(std::size_t alignment, std::size_t size) noexcept {
  Count();
  return __libc_memalign(alignment, size);
}
int posix_memalign(void** out, std::size_t alignment, std::size_t size) noexcept {
  // POSIX: a power of two and a multiple of sizeof(void*).
  if (alignment == 0 || (alignment & (alignment - 1)) != 0 || alignment % sizeof(void*) != 0) {
    return EINVAL;
  }
  Count();
  void* p = __libc_memalign(alignment, size);
  if (p == nullptr) return ENOMEM;
  *out = p;
  return 0;
}
void free(void* p) noexcept { __libc_free(p); }
}
#endif  // NIGHTJAR_ALLOCATION_COUNTER_SEES_MALLOC

// Replacement global allocation functions: count (unless malloc does), then defer to
// malloc. Operator new must throw on failure; that is its contract, not our choice.
// NOLINTBEGIN(cppcoreguidelines-no-malloc)
void* operator new(std::size_t size) {
  CountInNew();
  if (void* p = std::malloc(size == 0 ? 1 : size)) return p;
  throw std::bad_alloc();
}
void* operator new[](std::size_t size) { return operator new(size); }
void* operator new(std::size_t size, std::align_val_t alignment) {
  CountInNew();
  const auto a = static_cast<std::size_t>(alignment);
  if (void* p = std::aligned_alloc(a, RoundUp(size, a))) return p;
  throw std::bad_alloc();
}
void* operator new[](std::size_t size, std::align_val_t alignment) {
  return operator new(size, alignment);
}
void operator delete(void* p) noexcept { std::free(p); }
void operator delete[](void* p) noexcept { std::free(p); }
void operator delete(void* p, std::size_t) noexcept { std::free(p); }
void operator delete[](void* p, std::size_t) noexcept { std::free(p); }
void operator delete(void* p, std::align_val_t) noexcept { std::free(p); }
void operator delete[](void* p, std::align_val_t) noexcept { std::free(p); }
void operator delete(void* p, std::size_t, std::align_val_t) noexcept { std::free(p); }
void operator delete[](void* p, std::size_t, std::align_val_t) noexcept { std::free(p); }
// NOLINTEND(cppcoreguidelines-no-malloc)

namespace nightjar::testing {

AllocationCounter::AllocationCounter() : start_(allocations_on_thread) {}
std::size_t AllocationCounter::count() const { return allocations_on_thread - start_; }

}  // namespace nightjar::testing
