// WorkQueue: the bounded hand-over from the network thread to one engine worker.
//
// Samples go through TryPush() or, a batch at a time, TryPushBatch(): neither blocks, and
// when the queue already holds `capacity` samples a sample is refused (the caller counts
// the drop). Control items
// (operator commands, a config reload, the stop request) go through PushControl(), which
// always succeeds: there are few of them and losing one would lose an operator's action.
// PushMarker() queues a sample-stream item beyond the capacity, in order with the samples:
// the caller bounds how many (EngineWorker queues one hole marker per channel per hole).
// PopAll() hands the worker everything queued, control items first, in one lock.
//
// Wake-ups: the consumer only waits while the queue is empty and PopAll() empties it, so
// a push notifies the condition variable only when it makes an empty queue non-empty;
// pushes onto a queue that already holds something cost no wake-up (no futex call).
//
// Thread-safety: any number of producers, one consumer (PopAll). Ownership: owns the
// queued items.
#pragma once

#include <algorithm>
#include <chrono>
#include <condition_variable>
#include <cstddef>
#include <deque>
#include <iterator>
#include <mutex>
#include <vector>

namespace nightjar::service {

template <typename Sample, typename Control>
class WorkQueue {
 public:
  explicit WorkQueue(std::size_t capacity) : capacity_(capacity) {}

  // False when `capacity` samples are waiting already: nothing is queued and `sample` is
  // left as it was (the caller may still read it).
  bool TryPush(Sample&& sample) {
    bool wake = false;
    {
      const std::lock_guard lock(mutex_);
      if (samples_.size() >= capacity_) return false;
      wake = EmptyLocked();
      samples_.push_back(std::move(sample));
    }
    if (wake) ready_.notify_one();
    return true;
  }

  // Moves samples from the front of `batch` into the queue while there is room, in one
  // lock; returns how many. The rest, batch[returned..], are left as they were (refused:
  // the caller counts them). `batch` keeps its size.
  std::size_t TryPushBatch(std::vector<Sample>& batch) {
    bool wake = false;
    std::size_t taken = 0;
    {
      const std::lock_guard lock(mutex_);
      const std::size_t room = samples_.size() >= capacity_ ? 0 : capacity_ - samples_.size();
      taken = std::min(room, batch.size());
      if (taken == 0) return 0;
      wake = EmptyLocked();
      const auto first = batch.begin();
      samples_.insert(samples_.end(), std::make_move_iterator(first),
                      std::make_move_iterator(first + static_cast<std::ptrdiff_t>(taken)));
    }
    if (wake) ready_.notify_one();
    return taken;
  }

  // Queued after every sample pushed so far, whatever the capacity.
  void PushMarker(Sample marker) {
    bool wake = false;
    {
      const std::lock_guard lock(mutex_);
      wake = EmptyLocked();
      samples_.push_back(std::move(marker));
    }
    if (wake) ready_.notify_one();
  }

  void PushControl(Control control) {
    bool wake = false;
    {
      const std::lock_guard lock(mutex_);
      wake = EmptyLocked();
      controls_.push_back(std::move(control));
    }
    if (wake) ready_.notify_one();
  }

  // Waits up to `timeout` for anything, then moves every queued item out (the vectors are
  // cleared first; their capacity is reused). Returns whether anything was taken.
  bool PopAll(std::chrono::milliseconds timeout, std::vector<Sample>& samples,
              std::vector<Control>& controls) {
    samples.clear();
    controls.clear();
    std::unique_lock lock(mutex_);
    ready_.wait_for(lock, timeout, [this] { return !samples_.empty() || !controls_.empty(); });
    for (Control& c : controls_) controls.push_back(std::move(c));
    for (Sample& s : samples_) samples.push_back(std::move(s));
    controls_.clear();
    samples_.clear();
    return !samples.empty() || !controls.empty();
  }

  std::size_t size() const {
    const std::lock_guard lock(mutex_);
    return samples_.size();
  }
  std::size_t capacity() const { return capacity_; }

 private:
  bool EmptyLocked() const { return samples_.empty() && controls_.empty(); }

  const std::size_t capacity_;
  mutable std::mutex mutex_;
  std::condition_variable ready_;
  std::deque<Sample> samples_;    // guarded by mutex_
  std::deque<Control> controls_;  // guarded by mutex_
};

}  // namespace nightjar::service
