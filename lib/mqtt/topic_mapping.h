// Topic patterns: which MQTT topics carry samples, and which channel each one feeds.
//
// A TopicPattern pairs a topic pattern with a channel template:
//
//     topic pattern     brackwater/{area}/{asset}/{signal}
//     channel template  {area}.{asset}.{signal}
//
// It subscribes to the MQTT filter brackwater/+/+/+ and maps the topic
// brackwater/cw2/pump_a/flow to the channel cw2.pump_a.flow.
//
// Topic pattern: levels separated by '/', each one of
//   {name}  a capture: matches exactly one level and names it; in the filter it is '+'.
//           name is an ASCII letter or '_' followed by letters, digits or '_'; each name
//           appears at most once.
//   +       any one level, not named (a level that the channel leaves out).
//   text    a literal level, matched byte for byte (case-sensitive); it must not hold
//           '+', '#', '{' or '}'.
// Not accepted: an empty pattern or empty level ("a//b", a leading or trailing '/'), '#'
// (a channel needs a fixed number of levels), a capture sharing its level with text
// ("pump_{id}"), more than kMaxPatternLevels levels.
//
// Channel template: text and {name} references to the pattern's captures. Every capture
// must be used: two topics differing only in an unused capture would feed one channel.
// Text may hold ASCII letters, digits, '_', '-' and '.'; the channel's dot-separated
// levels must not be empty ("{a}..{b}", a leading or trailing '.'). A capture may be used
// more than once. A pattern without captures maps its one topic to a fixed channel.
//
// A topic maps when it has the pattern's number of levels, every literal level is equal,
// and every captured level can be part of a channel name: not empty, no '.' (it would add
// a channel level), no space or control character, none of * ? [ ] { } (the config's
// channel globs reserve them). '+' levels are not looked at, so every topic that differs
// only there feeds the same channel: use '+' only for a level that never varies.
//
// Errors: pattern and template errors quote the text and give the 1-based column (and,
// for patterns, the level), e.g.
//   topic pattern 'brackwater/{area/x': column 12 (level 2): '{' without '}'
// Topic errors start "topic <topic>: " and say which level is wrong.
//
// Thread-safety: a TopicPattern is immutable after Create(); its const methods are safe
// from any number of threads. Ownership: a plain copyable value.
#pragma once

#include <cstddef>
#include <string>
#include <string_view>
#include <vector>

#include "core/status.h"

namespace nightjar::mqtt {

inline constexpr std::size_t kMaxPatternLevels = 32;

class TopicPattern {
 public:
  // Compiles a pattern and template, or InvalidArgument saying what and where.
  static core::Result<TopicPattern> Create(std::string_view pattern,
                                           std::string_view channel_template);

  const std::string& pattern() const { return pattern_; }
  const std::string& channel_template() const { return template_; }
  // The MQTT subscription filter: the pattern with every capture replaced by '+'.
  const std::string& filter() const { return filter_; }
  std::size_t levels() const { return levels_.size(); }

  // Whether `topic` has the pattern's shape: as many levels, literal levels equal.
  // Captured values are not checked (MapTo does that).
  bool Matches(std::string_view topic) const;

  // Writes the channel name for `topic` into *channel (cleared first, its capacity
  // reused), or returns InvalidArgument "topic <topic>: ..." naming the level at fault.
  core::Status MapTo(std::string_view topic, std::string* channel) const;
  core::Result<std::string> Map(std::string_view topic) const;

 private:
  enum class LevelKind { kLiteral, kCapture, kAny };
  struct Level {
    LevelKind kind = LevelKind::kLiteral;
    std::string text;  // literal text, or the capture's name
  };
  // A piece of the channel template: literal text, or the level index of a capture.
  struct Piece {
    bool is_capture = false;
    std::string literal;
    std::size_t level = 0;
  };

  TopicPattern() = default;
  // Splits `topic` into at most kMaxPatternLevels views; returns the number of levels
  // (which may exceed the views filled when the topic is longer).
  static std::size_t Split(std::string_view topic, std::string_view* views);

  std::string pattern_;
  std::string template_;
  std::string filter_;
  std::vector<Level> levels_;
  std::vector<Piece> pieces_;
};

// Whether `topic` matches the MQTT subscription `filter` by MQTT 3.1.1 section 4.7 (the
// same in MQTT 5): '+' matches one whole level, a final '#' matches any number of levels
// including none ("a/#" matches "a"), and a filter starting with a wildcard does not
// match a topic starting with '$'. Neither argument is validated.
bool TopicMatchesFilter(std::string_view filter, std::string_view topic);

}  // namespace nightjar::mqtt
