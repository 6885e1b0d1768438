// Which worker owns a channel: a stable hash of the channel name modulo the worker count.
//
// Stable means the same across runs, builds and machines (FNV-1a 64, not std::hash), so a
// channel stays on one worker for the process's life and logs can be compared between
// runs. Thread-safety: a pure function.
#pragma once

#include <cstddef>
#include <cstdint>
#include <string_view>

namespace nightjar::service {

// FNV-1a, 64 bit (offset basis 14695981039346656037, prime 1099511628211).
std::uint64_t StableChannelHash(std::string_view channel);

// The worker index in [0, workers) for `channel`; workers must be >= 1.
std::size_t ShardFor(std::string_view channel, std::size_t workers);

}  // namespace nightjar::service
