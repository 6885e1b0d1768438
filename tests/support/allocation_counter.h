// Counts heap allocations made by the current thread inside a scope.
//
// Linking this into a test binary replaces the global operator new so that every
// allocation (std containers, Eigen, strings) is seen, not only Eigen's. Used to prove
// that the per-sample path never allocates after a channel is created.
#pragma once

#include <cstddef>

namespace nightjar::testing {

class AllocationCounter {
 public:
  AllocationCounter();   // starts counting on this thread
  ~AllocationCounter();  // stops counting
  AllocationCounter(const AllocationCounter&) = delete;
  AllocationCounter& operator=(const AllocationCounter&) = delete;

  // Allocations seen on this thread since construction.
  std::size_t count() const;

 private:
  std::size_t start_;
};

}  // namespace nightjar::testing
