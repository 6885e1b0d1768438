// Topic names the daemon publishes on, built from the configured prefixes.
//
// A channel's alerts and state go to <prefix>/<channel with every '.' turned into '/'>:
// cw2.pump_a.flow -> nightjar/alert/cw2/pump_a/flow, so a subscriber can pick an asset or
// area with MQTT wildcards (nightjar/alert/cw2/pump_a/#). Channel names never hold '/',
// '+' or '#' (topic_mapping.h rejects them), so the mapping is one to one.
// Thread-safety: pure functions.
#pragma once

#include <string>
#include <string_view>

namespace nightjar::service {

// Writes <prefix>/<channel with dots as slashes> into *topic (cleared first).
void ChannelTopic(std::string_view prefix, std::string_view channel, std::string* topic);
std::string ChannelTopic(std::string_view prefix, std::string_view channel);

}  // namespace nightjar::service
