#include "service/shard.h"

#include <utility>

#include "core/alarm_episodes.h"

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

std::size_t ShardFor(std::string_view channel, std::string_view asset, std::size_t workers) {
  return ShardFor(asset.empty() ? channel : asset, workers);
}

ShardRouter::ShardRouter(std::size_t workers, core::ChannelOptionsResolver resolver)
    : workers_(workers), resolver_(std::move(resolver)) {}

std::size_t ShardRouter::WorkerFor(std::string_view channel) {
  if (workers_ <= 1) return 0;
  if (const auto it = known_.find(channel); it != known_.end()) return it->second;
  const std::string asset =
      core::AssetOfChannel(channel, resolver_ ? resolver_(channel).asset : std::string());
  const std::size_t worker = ShardFor(channel, asset, workers_);
  known_.emplace(std::string(channel), worker);
  return worker;
}

}  // namespace nightjar::service
