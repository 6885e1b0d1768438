#include "core/alarm_episodes.h"

#include <algorithm>

namespace nightjar::core {
namespace {

bool Contains(const std::vector<std::string>& members, std::string_view channel) {
  return std::find(members.begin(), members.end(), channel) != members.end();
}

bool Remove(std::vector<std::string>& members, std::string_view channel) {
  const auto it = std::find(members.begin(), members.end(), channel);
  if (it == members.end()) return false;
  members.erase(it);
  return true;
}

void Stamp(const std::string& first_out, TimestampUs since, std::size_t members, Alert& alert) {
  alert.episode_first_out = first_out;
  alert.episode_since = since;
  alert.episode_active = static_cast<int>(members);
}

}  // namespace

std::string AssetOfChannel(std::string_view channel, std::string_view configured) {
  if (configured == "none") return {};
  if (!configured.empty()) return std::string(configured);
  const std::size_t dot = channel.rfind('.');
  if (dot == std::string_view::npos || dot == 0) return {};
  return std::string(channel.substr(0, dot));
}

AlarmEpisodes::Episode& AlarmEpisodes::EpisodeOf(std::string_view asset) {
  auto it = episodes_.find(asset);
  if (it == episodes_.end()) it = episodes_.emplace(std::string(asset), Episode{}).first;
  return it->second;
}

void AlarmEpisodes::Annotate(std::string_view asset, TimestampUs window, Alert& alert) {
  alert.annunciated = true;
  if (alert.kind != AlertKind::kAnomaly || asset.empty()) return;
  alert.asset = std::string(asset);
  Episode& episode = EpisodeOf(asset);
  if (alert.phase == AlertPhase::kRaise) {
    if (episode.members.empty()) {
      episode.first_out = alert.channel;
      episode.since = alert.time;
      episode.last_annunciated = alert.time;
      episode.highest_annunciated = alert.priority;
      episode.members.push_back(alert.channel);
      ++opened_;
    } else if (Contains(episode.members, alert.channel)) {
      alert.annunciated = false;
    } else {
      episode.members.push_back(alert.channel);
      alert.annunciated = alert.priority > episode.highest_annunciated ||
                          alert.time - episode.last_annunciated > window;
      if (alert.annunciated) {
        episode.highest_annunciated = std::max(episode.highest_annunciated, alert.priority);
        episode.last_annunciated = alert.time;
      }
    }
    Stamp(episode.first_out, episode.since, episode.members.size(), alert);
    return;
  }
  const bool was_member = Remove(episode.members, alert.channel);
  Stamp(episode.first_out, episode.since, episode.members.size(), alert);
  // Only the clear that empties the episode ends it for the operator.
  alert.annunciated = was_member && episode.members.empty();
  if (!was_member && episode.members.empty()) {
    alert.episode_first_out.clear();
    alert.episode_since = 0;
  }
}

void AlarmEpisodes::NoteActive(std::string_view asset, std::string_view channel, TimestampUs since,
                               Priority priority) {
  if (asset.empty()) return;
  Episode& episode = EpisodeOf(asset);
  if (Contains(episode.members, channel)) return;
  if (episode.members.empty()) {
    episode.first_out = std::string(channel);
    episode.since = since;
    episode.last_annunciated = since;
    episode.highest_annunciated = priority;
    ++opened_;
  }
  episode.members.emplace_back(channel);
}

void AlarmEpisodes::NoteSilenced(std::string_view asset, std::string_view channel) {
  if (asset.empty()) return;
  const auto it = episodes_.find(asset);
  if (it != episodes_.end()) Remove(it->second.members, channel);
}

std::size_t AlarmEpisodes::open_episodes() const {
  return static_cast<std::size_t>(
      std::count_if(episodes_.begin(), episodes_.end(),
                    [](const auto& entry) { return !entry.second.members.empty(); }));
}

}  // namespace nightjar::core
