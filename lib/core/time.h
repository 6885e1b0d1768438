// Time as nightjar's core sees it: microseconds since the Unix epoch, UTC.
//
// The core has no clock. Every sample carries its own timestamp, so live runs and
// replays of a recording share one code path and a replay repeats exactly.
#pragma once

#include <cstdint>

namespace nightjar::core {

// Microseconds since 1970-01-01T00:00:00Z. Signed so differences are plain subtraction.
using TimestampUs = std::int64_t;

inline constexpr TimestampUs kMicrosPerSecond = 1'000'000;
inline constexpr double kSecondsPerDay = 86'400.0;

inline constexpr double ToSeconds(TimestampUs duration) {
  return static_cast<double>(duration) / static_cast<double>(kMicrosPerSecond);
}
inline constexpr TimestampUs FromSeconds(double seconds) {
  return static_cast<TimestampUs>(seconds * static_cast<double>(kMicrosPerSecond));
}

}  // namespace nightjar::core
