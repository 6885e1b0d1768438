#include "replay/tuned_config_writer.h"

#include <charconv>
#include <cstddef>
#include <vector>

namespace nightjar::replay {

namespace {

std::string Shortest(double value) {
  char text[32];
  const auto done = std::to_chars(text, text + sizeof text, value);
  return std::string(text, done.ptr);
}

// YAML double-quoted scalar.
std::string Quoted(std::string_view text) {
  std::string out = "\"";
  for (const char c : text) {
    if (c == '"' || c == '\\') out += '\\';
    out += c;
  }
  return out + "\"";
}

// Comment text on one line (a newline would end the comment).
std::string OneLine(std::string_view text) {
  std::string out(text);
  for (char& c : out) {
    if (c == '\n' || c == '\r') c = ' ';
  }
  return out;
}

std::vector<std::string_view> SplitLines(std::string_view text) {
  std::vector<std::string_view> lines;
  std::size_t start = 0;
  while (start < text.size()) {
    std::size_t end = text.find('\n', start);
    if (end == std::string_view::npos) end = text.size();
    lines.push_back(text.substr(start, end - start));
    start = end + 1;
  }
  return lines;
}

bool IsBlankOrComment(std::string_view line) {
  const std::size_t first = line.find_first_not_of(" \t\r");
  return first == std::string_view::npos || line[first] == '#';
}

// A top-level key line: starts in column 0 with something other than a comment, a list
// dash or a document marker.
bool IsTopLevelKey(std::string_view line) {
  if (line.empty() || IsBlankOrComment(line)) return false;
  const char c = line[0];
  return c != ' ' && c != '\t' && c != '-' && line.substr(0, 3) != "---";
}

std::string Blocks(const SweepResult& result, const std::string& indent) {
  std::string out;
  const std::string inner = indent + "  ";
  for (const ChannelChoice& choice : result.channels) {
    out += indent + "# " + OneLine(choice.channel) + ": " + DescribeSetting(choice.chosen) +
           (choice.chosen == choice.base ? " (the configured setting)" : "") + "\n";
    out += indent + "#   was " + DescribeSetting(choice.base) + "\n";
    out += indent + "#   why: " + OneLine(choice.reason) + "\n";
    out += indent + "- match: " + Quoted(choice.channel) + "\n";
    out += inner + "thresholds:\n";
    out += inner + "  false_alarms_per_day: " + Shortest(choice.chosen.false_alarms_per_day) + "\n";
    out += inner + "  cusum_k: " + Shortest(choice.chosen.cusum_k) + "\n";
    out += inner + "  ewma_lambda: " + Shortest(choice.chosen.ewma_lambda) + "\n";
    out += inner + "anomaly_alarm:\n";
    out += inner + "  on_delay_s: " + Shortest(choice.chosen.on_delay_s) + "\n";
  }
  return out;
}

std::string Header(const TunedConfigSource& source, const SweepResult& result) {
  std::string out =
      "# Threshold settings tuned by `nightjar tune` on " + OneLine(source.input) + "\n";
  if (!source.config_path.empty()) {
    out += "# Base config: " + OneLine(source.config_path) +
           " (copied unchanged above the tuned blocks)\n";
  }
  out += "# " + std::to_string(result.settings) +
         " settings per channel re-evaluated on cached residuals; ";
  if (result.labelled) {
    out += "chosen for overall event F1 against " + OneLine(source.labels) +
           " (replay_data/FORMAT.md, \"Tuning\")\n";
  } else {
    out += "chosen as the most sensitive within " + Shortest(result.per_channel_budget) +
           " anomaly raises per channel per day (replay_data/FORMAT.md, \"Tuning\")\n";
  }
  out += "# The tuned blocks come last in `channels:`, so they override earlier settings.\n";
  return out;
}

}  // namespace

core::Result<std::string> WriteTunedConfig(const TunedConfigSource& source,
                                           const SweepResult& result) {
  const std::vector<std::string_view> lines = SplitLines(source.config_text);
  // Find the top-level `channels:` key and where its list ends.
  std::size_t channels_line = lines.size();
  for (std::size_t i = 0; i < lines.size(); ++i) {
    if (!IsTopLevelKey(lines[i])) continue;
    const std::string_view line = lines[i];
    if (line.substr(0, 9) != "channels:") continue;
    std::string_view rest = line.substr(9);
    const std::size_t comment = rest.find('#');
    if (comment != std::string_view::npos) rest = rest.substr(0, comment);
    if (rest.find_first_not_of(" \t\r") != std::string_view::npos) {
      return core::Status::InvalidArgument(
          source.config_path + ":" + std::to_string(i + 1) +
          ": channels: write the list as a block (one \"- match:\" per line) so tuned blocks "
          "can be appended to it");
    }
    channels_line = i;
    break;
  }

  std::string out = Header(source, result);
  if (channels_line == lines.size()) {
    if (!source.config_text.empty()) {
      out += "\n";
      out += source.config_text;
      if (source.config_text.back() != '\n') out += "\n";
    }
    out += "\nchannels:\n" + Blocks(result, "  ");
    return out;
  }
  // The list runs to the next top-level key; its items' indentation is kept.
  std::size_t end = channels_line + 1;
  std::string indent = "  ";
  bool indent_seen = false;
  while (end < lines.size() && !IsTopLevelKey(lines[end])) {
    const std::string_view line = lines[end];
    if (!indent_seen && !IsBlankOrComment(line)) {
      const std::size_t dash = line.find_first_not_of(' ');
      if (dash != std::string_view::npos && line[dash] == '-') indent = std::string(dash, ' ');
      indent_seen = true;
    }
    ++end;
  }
  // Insert after the list's last non-blank line, before trailing blanks and comments.
  std::size_t insert_at = end;
  while (insert_at > channels_line + 1 && IsBlankOrComment(lines[insert_at - 1])) --insert_at;
  out += "\n";
  for (std::size_t i = 0; i < lines.size(); ++i) {
    if (i == insert_at) out += Blocks(result, indent);
    out += lines[i];
    out += "\n";
  }
  if (insert_at == lines.size()) out += Blocks(result, indent);
  return out;
}

}  // namespace nightjar::replay
