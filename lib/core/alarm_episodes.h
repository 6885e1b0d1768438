// AlarmEpisodes: one alarm episode per asset, so that one fault on an asset is
// annunciated once and not once per channel it shows on (DESIGN-NOTES §4: channels move
// together).
//
// An asset is a named group of channels (a pump, a heat exchanger, a test rig). For the
// anomaly alarms of one asset:
//  * the first raise while none of the asset's channels is in alarm opens an episode; it
//    is the episode's first-out and is annunciated;
//  * a raise while the episode is open joins it as a member and is not annunciated (the
//    alarm is still published, marked `annunciated: false`: suppressed by design in
//    ISA-18.2 terms, the operator sees one alarm and the dashboard lists its members),
//    unless its priority is higher than any annunciated so far in the episode (a higher
//    priority is always annunciated), or it comes later than the episode window after the
//    episode's latest annunciated raise: an episode that stays open (a member chattering
//    or standing in alarm) must not hide a fault that starts later, so an asset
//    annunciates at most one raise per window, not none;
//  * a member's clear leaves the episode; the clear of the last member ends it and is
//    annunciated (the episode's return to normal), the others are not.
// A channel whose asset is empty is grouped with no other: every edge is annunciated.
// Sensor alarms (data quality of one instrument) and event notices are never grouped.
//
// Time and order come with the alerts; no clock. Thread-safety: none (one owner, the
// engine of the worker that holds all of an asset's channels). Plain value type.
#pragma once

#include <cstddef>
#include <string>
#include <string_view>
#include <unordered_map>
#include <vector>

#include "core/alert.h"
#include "core/time.h"

namespace nightjar::core {

// The asset a channel belongs to, given its configured `asset` option:
//   ""      derived from the name: everything before its last dot ("cw2.pump_a.flow" ->
//           "cw2.pump_a"); a name without a dot is its own asset, so ungrouped ("")
//   "none"  ungrouped ("")
//   other   that name.
std::string AssetOfChannel(std::string_view channel, std::string_view configured);

class AlarmEpisodes {
 public:
  // Groups one edge of `alert.channel`, which belongs to `asset`: fills alert.asset,
  // alert.annunciated and the episode fields (alert.h) and updates the episode. Alerts
  // that are not anomaly alarms, and alerts of an ungrouped channel, are left annunciated
  // with no episode. A raise of a channel already in the episode, or a clear of one not
  // in it, changes nothing and is not annunciated (a repeated edge is never a new alarm).
  // `window` (>= 0) is the episode window of the raising channel.
  void Annotate(std::string_view asset, TimestampUs window, Alert& alert);

  // `channel` of `asset` is in alarm without an edge now (restored from a checkpoint, its
  // raise went out before the restart): it joins the episode, opening one with itself as
  // first-out since `since` if there is none.
  void NoteActive(std::string_view asset, std::string_view channel, TimestampUs since,
                  Priority priority);
  // `channel` left alarm without an edge (an operator shelved it or took it out of
  // service): it leaves the episode; if it was the last member the episode ends silently
  // (the operator silenced it). Unknown names are ignored.
  void NoteSilenced(std::string_view asset, std::string_view channel);

  // Episodes open now, and how many were opened since construction.
  std::size_t open_episodes() const;
  std::size_t episodes_opened() const { return opened_; }

 private:
  struct Episode {
    std::vector<std::string> members;  // channels in alarm; few per asset
    std::string first_out;
    TimestampUs since = 0;
    TimestampUs last_annunciated = 0;  // the latest annunciated raise
    Priority highest_annunciated = Priority::kLow;
  };
  struct NameHash {
    using is_transparent = void;
    std::size_t operator()(std::string_view name) const {
      return std::hash<std::string_view>{}(name);
    }
  };
  Episode& EpisodeOf(std::string_view asset);

  std::unordered_map<std::string, Episode, NameHash, std::equal_to<>> episodes_;
  std::size_t opened_ = 0;
};

}  // namespace nightjar::core
