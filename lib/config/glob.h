// Channel-name globs for `channels[].match` in the config file.
//
// Channel names are dot-separated levels ("cw2.pump_a.flow"). In a pattern:
//   *   matches any run of characters within one level (never a '.'), including none;
//   **  matches any run of characters across levels (dots included), including none;
//   ?   matches exactly one character other than '.';
// every other character matches itself (case-sensitive). "cw2.pump_a.*" matches
// "cw2.pump_a.flow" but not "cw2.pump_a.motor.current"; "cw2.**" matches both, and
// "**" matches every channel.
// Thread-safety: pure functions.
#pragma once

#include <string_view>

#include "core/status.h"

namespace nightjar::config {

// OK, or InvalidArgument saying what is wrong: an empty pattern, "***", an empty level
// ("a..b", a leading or trailing '.'), whitespace or a control character, or one of
// [ ] { } (character classes and alternatives are not supported).
core::Status ValidateGlob(std::string_view pattern);

// Whether `channel` matches the whole of `pattern`. A pattern that fails ValidateGlob
// still gets the meaning above (so matching is total), but the loader rejects it.
bool GlobMatch(std::string_view pattern, std::string_view channel);

}  // namespace nightjar::config
