#include "mqtt/topic_mapping.h"

#include <algorithm>
#include <array>
#include <utility>

#include "mqtt/internal/text.h"

namespace nightjar::mqtt {
namespace {

constexpr std::size_t kMaxTopicBytes = 65535;  // MQTT's limit on a topic's length

bool IsAsciiLetter(char c) { return (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z'); }
bool IsAsciiDigit(char c) { return c >= '0' && c <= '9'; }
bool IsNameStart(char c) { return IsAsciiLetter(c) || c == '_'; }
bool IsNameChar(char c) { return IsNameStart(c) || IsAsciiDigit(c); }
bool IsTemplateChar(char c) { return IsNameChar(c) || c == '-' || c == '.'; }

core::Status PatternError(std::string_view pattern, std::size_t column, std::size_t level,
                          std::string_view why) {
  return core::Status::InvalidArgument(
      "topic pattern '" + internal::Printable(pattern, internal::kMaxQuotedTopic) + "': column " +
      std::to_string(column) + " (level " + std::to_string(level) + "): " + std::string(why));
}

core::Status TemplateError(std::string_view channel_template, std::size_t column,
                           std::string_view why) {
  return core::Status::InvalidArgument(
      "channel template '" + internal::Printable(channel_template, internal::kMaxQuotedTopic) +
      "': column " + std::to_string(column) + ": " + std::string(why));
}

// Why a captured topic level cannot be part of a channel name, or nullptr if it can.
const char* BadCaptureValue(std::string_view value) {
  if (value.empty()) return "is empty";
  for (char c : value) {
    const auto byte = static_cast<unsigned char>(c);
    if (c == '.') return "contains '.', which would split the channel name";
    if (byte <= 0x20 || byte == 0x7F) return "contains a space or control character";
    switch (c) {
      case '*':
      case '?':
      case '[':
      case ']':
      case '{':
      case '}':
        return "contains one of * ? [ ] { }, which channel names reserve";
      default:
        break;
    }
  }
  return nullptr;
}

}  // namespace

core::Result<TopicPattern> TopicPattern::Create(std::string_view pattern,
                                                std::string_view channel_template) {
  TopicPattern p;
  p.pattern_ = std::string(pattern);
  p.template_ = std::string(channel_template);
  if (pattern.empty()) return PatternError(pattern, 1, 1, "empty pattern");
  if (pattern.size() > kMaxTopicBytes) {
    return PatternError(pattern, kMaxTopicBytes + 1, 1, "longer than 65535 bytes");
  }

  // The pattern, one level at a time.
  std::size_t start = 0;
  for (std::size_t level_no = 1;; ++level_no) {
    const std::size_t slash = pattern.find('/', start);
    const std::size_t end = slash == std::string_view::npos ? pattern.size() : slash;
    const std::string_view text = pattern.substr(start, end - start);
    const std::size_t column = start + 1;
    if (level_no > kMaxPatternLevels) {
      return PatternError(pattern, column, level_no,
                          "more than " + std::to_string(kMaxPatternLevels) + " levels");
    }
    if (text.empty()) {
      return PatternError(pattern, column, level_no,
                          "empty level (a leading, trailing or doubled '/')");
    }
    Level level;
    if (text == "+") {
      level.kind = LevelKind::kAny;
    } else if (text.front() == '{') {
      const std::size_t close = text.find('}');
      if (close == std::string_view::npos) {
        return PatternError(pattern, column, level_no, "'{' without '}'");
      }
      if (close + 1 != text.size()) {
        return PatternError(pattern, column + close + 1, level_no,
                            "text after '}': a capture must be a whole level");
      }
      const std::string_view name = text.substr(1, close - 1);
      if (name.empty()) return PatternError(pattern, column, level_no, "empty capture name");
      for (std::size_t i = 0; i < name.size(); ++i) {
        if (i == 0 ? !IsNameStart(name[i]) : !IsNameChar(name[i])) {
          return PatternError(pattern, column + 1 + i, level_no,
                              "capture names are an ASCII letter or '_' followed by letters, "
                              "digits or '_'");
        }
      }
      for (const Level& seen : p.levels_) {
        if (seen.kind == LevelKind::kCapture && seen.text == name) {
          return PatternError(pattern, column, level_no,
                              "capture {" + std::string(name) + "} appears twice");
        }
      }
      level.kind = LevelKind::kCapture;
      level.text = std::string(name);
    } else {
      for (std::size_t i = 0; i < text.size(); ++i) {
        const char c = text[i];
        if (c == '#') {
          return PatternError(pattern, column + i, level_no,
                              "'#' is not supported: a channel needs a fixed number of levels, "
                              "so name each level with {name} or match it with '+'");
        }
        if (c == '+') {
          return PatternError(pattern, column + i, level_no,
                              "'+' inside a level: '+' must be a whole level");
        }
        if (c == '{' || c == '}') {
          return PatternError(pattern, column + i, level_no,
                              "brace inside a level: a capture must be a whole level");
        }
      }
      level.kind = LevelKind::kLiteral;
      level.text = std::string(text);
    }
    p.levels_.push_back(std::move(level));
    if (slash == std::string_view::npos) break;
    start = slash + 1;
  }

  for (const Level& level : p.levels_) {
    if (!p.filter_.empty()) p.filter_ += '/';
    p.filter_ += level.kind == LevelKind::kLiteral ? level.text : std::string("+");
  }

  // The channel template.
  if (channel_template.empty()) return TemplateError(channel_template, 1, "empty template");
  std::vector<bool> used(p.levels_.size(), false);
  bool at_level_start = true;  // nothing yet in the current channel level
  std::size_t last_dot_column = 0;
  for (std::size_t i = 0; i < channel_template.size();) {
    const char c = channel_template[i];
    if (c == '{') {
      const std::size_t close = channel_template.find('}', i);
      if (close == std::string_view::npos) {
        return TemplateError(channel_template, i + 1, "'{' without '}'");
      }
      const std::string_view name = channel_template.substr(i + 1, close - i - 1);
      std::size_t found = p.levels_.size();
      for (std::size_t l = 0; l < p.levels_.size(); ++l) {
        if (p.levels_[l].kind == LevelKind::kCapture && p.levels_[l].text == name) found = l;
      }
      if (found == p.levels_.size()) {
        return TemplateError(channel_template, i + 1,
                             "{" + internal::Printable(name, 64) +
                                 "} is not a capture of topic pattern '" + p.pattern_ + "'");
      }
      used[found] = true;
      p.pieces_.push_back(Piece{.is_capture = true, .literal = {}, .level = found});
      at_level_start = false;
      i = close + 1;
      continue;
    }
    if (c == '}') return TemplateError(channel_template, i + 1, "'}' without '{'");
    if (!IsTemplateChar(c)) {
      return TemplateError(channel_template, i + 1,
                           "character '" + internal::Printable(std::string_view(&c, 1), 1) +
                               "' not allowed (text may hold letters, digits, '_', '-', '.')");
    }
    if (c == '.') {
      if (at_level_start) {
        return TemplateError(channel_template, i + 1,
                             "empty channel level (a leading or doubled '.')");
      }
      at_level_start = true;
      last_dot_column = i + 1;
    } else {
      at_level_start = false;
    }
    if (p.pieces_.empty() || p.pieces_.back().is_capture) p.pieces_.push_back(Piece{});
    p.pieces_.back().literal += c;
    ++i;
  }
  if (at_level_start) {
    return TemplateError(channel_template, last_dot_column, "empty channel level (a trailing '.')");
  }
  for (std::size_t l = 0; l < p.levels_.size(); ++l) {
    if (p.levels_[l].kind == LevelKind::kCapture && !used[l]) {
      return TemplateError(channel_template, 1,
                           "capture {" + p.levels_[l].text + "} of topic pattern '" + p.pattern_ +
                               "' is not used, so topics differing only there would feed one "
                               "channel");
    }
  }
  return p;
}

std::size_t TopicPattern::Split(std::string_view topic, std::string_view* views) {
  std::size_t count = 0;
  std::size_t start = 0;
  while (true) {
    const std::size_t slash = topic.find('/', start);
    const std::size_t end = slash == std::string_view::npos ? topic.size() : slash;
    if (count < kMaxPatternLevels) views[count] = topic.substr(start, end - start);
    ++count;
    if (slash == std::string_view::npos) return count;
    start = slash + 1;
  }
}

bool TopicPattern::Matches(std::string_view topic) const {
  std::array<std::string_view, kMaxPatternLevels> views;
  if (Split(topic, views.data()) != levels_.size()) return false;
  for (std::size_t i = 0; i < levels_.size(); ++i) {
    if (levels_[i].kind == LevelKind::kLiteral && views[i] != levels_[i].text) return false;
  }
  return true;
}

core::Status TopicPattern::MapTo(std::string_view topic, std::string* channel) const {
  std::array<std::string_view, kMaxPatternLevels> views;
  const std::size_t count = Split(topic, views.data());
  if (count != levels_.size()) {
    return core::Status::InvalidArgument(internal::TopicPrefix(topic) + "has " +
                                         std::to_string(count) +
                                         (count == 1 ? " level" : " levels") + ", topic pattern '" +
                                         pattern_ + "' wants " + std::to_string(levels_.size()));
  }
  for (std::size_t i = 0; i < levels_.size(); ++i) {
    const Level& level = levels_[i];
    if (level.kind == LevelKind::kLiteral && views[i] != level.text) {
      return core::Status::InvalidArgument(
          internal::TopicPrefix(topic) + "level " + std::to_string(i + 1) + " is '" +
          internal::Printable(views[i], internal::kMaxQuotedTopic) + "', topic pattern '" +
          pattern_ + "' wants '" + level.text + "'");
    }
    if (level.kind == LevelKind::kCapture) {
      if (const char* why = BadCaptureValue(views[i])) {
        return core::Status::InvalidArgument(
            internal::TopicPrefix(topic) + "level " + std::to_string(i + 1) + " ({" + level.text +
            "} = '" + internal::Printable(views[i], internal::kMaxQuotedTopic) + "') " + why);
      }
    }
  }
  channel->clear();
  for (const Piece& piece : pieces_) {
    if (piece.is_capture) {
      channel->append(views[piece.level]);
    } else {
      channel->append(piece.literal);
    }
  }
  return core::Status::Ok();
}

core::Result<std::string> TopicPattern::Map(std::string_view topic) const {
  std::string channel;
  core::Status status = MapTo(topic, &channel);
  if (!status.ok()) return status;
  return channel;
}

bool TopicMatchesFilter(std::string_view filter, std::string_view topic) {
  if (!filter.empty() && (filter.front() == '+' || filter.front() == '#') && !topic.empty() &&
      topic.front() == '$') {
    return false;
  }
  std::size_t f = 0;  // start of the current filter level
  std::size_t t = 0;  // start of the current topic level
  while (true) {
    const std::size_t f_end = std::min(filter.find('/', f), filter.size());
    const std::string_view f_level = filter.substr(f, f_end - f);
    if (f_level == "#") return f_end == filter.size();  // '#' must be last
    if (t > topic.size()) return false;                 // topic ran out of levels
    const std::size_t t_end = std::min(topic.find('/', t), topic.size());
    const std::string_view t_level = topic.substr(t, t_end - t);
    if (f_level != "+" && f_level != t_level) return false;
    const bool f_last = f_end == filter.size();
    const bool t_last = t_end == topic.size();
    if (f_last || t_last) {
      if (f_last && t_last) return true;
      // Filter "a/#" also matches topic "a": the '#' stands for zero further levels.
      return t_last && filter.substr(f_end) == "/#";
    }
    f = f_end + 1;
    t = t_end + 1;
  }
}

}  // namespace nightjar::mqtt
