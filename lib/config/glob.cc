#include "config/glob.h"

#include <string>
#include <vector>

namespace nightjar::config {

core::Status ValidateGlob(std::string_view pattern) {
  if (pattern.empty()) return core::Status::InvalidArgument("empty pattern");
  if (pattern.find("***") != std::string_view::npos) {
    return core::Status::InvalidArgument("'***' is not a glob: use '*' (one level) or '**' (any)");
  }
  for (const char c : pattern) {
    const auto u = static_cast<unsigned char>(c);
    if (u <= 0x20 || u == 0x7f) {
      return core::Status::InvalidArgument("whitespace or control character in pattern");
    }
    if (c == '[' || c == ']' || c == '{' || c == '}') {
      return core::Status::InvalidArgument(std::string("'") + c +
                                           "' is not supported (only *, ** and ?)");
    }
  }
  if (pattern.front() == '.' || pattern.back() == '.' ||
      pattern.find("..") != std::string_view::npos) {
    return core::Status::InvalidArgument("empty level (leading, trailing or doubled '.')");
  }
  return core::Status::Ok();
}

bool GlobMatch(std::string_view pattern, std::string_view channel) {
  // Dynamic programming over (pattern position, channel position): row[j] says whether
  // the pattern consumed so far matches channel[0, j). O(|pattern| * |channel|), no
  // backtracking blow-up on patterns such as "**a**a**a".
  const std::size_t n = channel.size();
  std::vector<char> row(n + 1, 0);
  std::vector<char> next(n + 1, 0);
  row[0] = 1;
  std::size_t i = 0;
  while (i < pattern.size()) {
    const char p = pattern[i];
    std::fill(next.begin(), next.end(), 0);
    if (p == '*') {
      const bool any_level = i + 1 < pattern.size() && pattern[i + 1] == '*';
      // next[j] = row[k] for some k <= j with channel[k, j) free of '.' (or any chars).
      bool reachable = false;
      for (std::size_t j = 0; j <= n; ++j) {
        if (j > 0 && !any_level && channel[j - 1] == '.') reachable = false;
        reachable = reachable || row[j] != 0;
        next[j] = reachable ? 1 : 0;
      }
      i += any_level ? 2 : 1;
    } else {
      for (std::size_t j = 0; j < n; ++j) {
        if (row[j] == 0) continue;
        const char c = channel[j];
        if (p == '?' ? c != '.' : c == p) next[j + 1] = 1;
      }
      ++i;
    }
    row.swap(next);
  }
  return row[n] != 0;
}

}  // namespace nightjar::config
