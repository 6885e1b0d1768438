// Which worker owns a channel: a stable hash of its routing key modulo the worker count.
// The routing key is the channel's asset (core/alarm_episodes.h) when it has one, so all
// channels of an asset meet on one engine and their alarms can form one episode; else
// the channel name.
//
// Stable means the same across runs, builds and machines (FNV-1a 64, not std::hash), so a
// channel stays on one worker for the process's life and logs can be compared between
// runs. Thread-safety: the functions are pure; a ShardRouter has one owner thread.
#pragma once

#include <cstddef>
#include <cstdint>
#include <string>
#include <string_view>
#include <unordered_map>

#include "core/engine_options.h"

namespace nightjar::service {

// FNV-1a, 64 bit (offset basis 14695981039346656037, prime 1099511628211).
std::uint64_t StableChannelHash(std::string_view channel);

// The worker index in [0, workers) for `channel`; workers must be >= 1.
std::size_t ShardFor(std::string_view channel, std::size_t workers);
// The worker index for `channel` of `asset` ("" = ungrouped: by the channel name).
std::size_t ShardFor(std::string_view channel, std::string_view asset, std::size_t workers);

// The worker of each channel under a config's channel options, remembered from the first
// time a channel is asked for: a reload that moves a channel to another asset takes
// effect for routing (and grouping) at the next start, when its checkpoint is loaded by
// the worker of its new asset.
class ShardRouter {
 public:
  // `resolver` gives a channel's options (its `asset`); empty: the built-in default (the
  // asset derived from the name).
  ShardRouter(std::size_t workers, core::ChannelOptionsResolver resolver);
  std::size_t WorkerFor(std::string_view channel);
  // Channels not asked for yet are routed by `resolver` from now on.
  void set_resolver(core::ChannelOptionsResolver resolver) { resolver_ = std::move(resolver); }

 private:
  struct NameHash {
    using is_transparent = void;
    std::size_t operator()(std::string_view name) const {
      return std::hash<std::string_view>{}(name);
    }
  };
  std::size_t workers_;
  core::ChannelOptionsResolver resolver_;
  std::unordered_map<std::string, std::size_t, NameHash, std::equal_to<>> known_;
};

}  // namespace nightjar::service
