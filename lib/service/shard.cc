#include "service/shard.h"

namespace nightjar::service {

std::uint64_t StableChannelHash(std::string_view channel) {
  std::uint64_t hash = 14695981039346656037ull;
  for (const char c : channel) {
    hash ^= static_cast<unsigned char>(c);
    hash *= 1099511628211ull;
  }
  return hash;
}

std::size_t ShardFor(std::string_view channel, std::size_t workers) {
  if (workers <= 1) return 0;
  return static_cast<std::size_t>(StableChannelHash(channel) % workers);
}

}  // namespace nightjar::service
