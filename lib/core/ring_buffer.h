// RingBuffer<T>: a fixed-capacity FIFO window that overwrites its oldest element.
//
// The capacity is set at construction, which makes the only heap allocation; push_back,
// indexing and clear never allocate, so the buffer is safe on the per-sample path.
// Index 0 is the oldest element, size() - 1 (also back()) the newest.
//
// T must be default-constructible (the storage is filled with T{} up front) and
// copy- or move-assignable. A zero-capacity buffer is allowed and drops every push.
// Thread-safety: none; one owner thread at a time (a channel's state lives on one worker).
// Ownership: owns its elements; copyable and movable like the std::vector it wraps.
#pragma once

#include <cassert>
#include <cstddef>
#include <utility>
#include <vector>

namespace nightjar::core {

template <typename T>
class RingBuffer {
 public:
  explicit RingBuffer(std::size_t capacity) : data_(capacity) {}

  std::size_t size() const { return size_; }
  std::size_t capacity() const { return data_.size(); }
  bool empty() const { return size_ == 0; }
  bool full() const { return size_ == data_.size(); }

  // Appends `value` as the newest element; when full, the oldest one is overwritten.
  void push_back(const T& value) {
    if (data_.empty()) return;
    data_[NextSlot()] = value;
  }
  void push_back(T&& value) {
    if (data_.empty()) return;
    data_[NextSlot()] = std::move(value);
  }

  // i = 0 is the oldest element. Requires i < size().
  const T& operator[](std::size_t i) const {
    assert(i < size_);
    return data_[Slot(i)];
  }
  T& operator[](std::size_t i) {
    assert(i < size_);
    return data_[Slot(i)];
  }

  // Oldest and newest elements. Require !empty().
  const T& front() const { return (*this)[0]; }
  T& front() { return (*this)[0]; }
  const T& back() const { return (*this)[size_ - 1]; }
  T& back() { return (*this)[size_ - 1]; }

  // Forgets the contents; keeps the storage (no allocation, no release). Old elements
  // stay constructed in their slots until overwritten.
  void clear() {
    head_ = 0;
    size_ = 0;
  }

 private:
  // Physical slot of logical index i. A compare instead of % keeps the hot path cheap.
  std::size_t Slot(std::size_t i) const {
    const std::size_t j = head_ + i;
    return j >= data_.size() ? j - data_.size() : j;
  }

  // Slot the next push writes to; advances head_ when the oldest is being overwritten.
  std::size_t NextSlot() {
    if (size_ < data_.size()) return Slot(size_++);
    const std::size_t slot = head_;
    head_ = (head_ + 1 == data_.size()) ? 0 : head_ + 1;
    return slot;
  }

  std::vector<T> data_;
  std::size_t head_ = 0;  // physical slot of the oldest element
  std::size_t size_ = 0;
};

}  // namespace nightjar::core
