#include "support/allocation_counter.h"

#include <cstdlib>
#include <new>

namespace {
thread_local std::size_t allocations_on_thread = 0;
}  // namespace

// Replacement global allocation functions: count, then defer to malloc.
void* operator new(std::size_t size) {
  ++allocations_on_thread;
  if (void* p = std::malloc(size == 0 ? 1 : size)) return p;  // NOLINT(cppcoreguidelines-no-malloc)
  throw std::bad_alloc();
}
void* operator new[](std::size_t size) { return operator new(size); }
void operator delete(void* p) noexcept { std::free(p); }    // NOLINT(cppcoreguidelines-no-malloc)
void operator delete[](void* p) noexcept { std::free(p); }  // NOLINT(cppcoreguidelines-no-malloc)
void operator delete(void* p, std::size_t) noexcept {
  std::free(p);
}  // NOLINT(cppcoreguidelines-no-malloc)
void operator delete[](void* p, std::size_t) noexcept {
  std::free(p);
}  // NOLINT(cppcoreguidelines-no-malloc)

namespace nightjar::testing {

AllocationCounter::AllocationCounter() : start_(allocations_on_thread) {}
AllocationCounter::~AllocationCounter() = default;
std::size_t AllocationCounter::count() const { return allocations_on_thread - start_; }

}  // namespace nightjar::testing
