#include "replay/labels.h"

#include <memory>
#include <utility>

#include "replay/recording_reader.h"
#include "replay/timestamp.h"

namespace nightjar::replay {
namespace {

bool IsLetter(char c) { return (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z'); }

bool IsKindWord(std::string_view kind) {
  if (kind.empty() || !IsLetter(kind[0])) return false;
  for (const char c : kind) {
    if (!IsLetter(c) && !(c >= '0' && c <= '9') && c != '_' && c != '-') return false;
  }
  return true;
}

std::string Where(const std::string& path, std::int64_t line, int column) {
  return path + ":" + std::to_string(line) + ":" + std::to_string(column) + ": ";
}

}  // namespace

core::Result<std::vector<LabelWindow>> ReadLabels(const std::string& path) {
  core::Result<std::unique_ptr<LineReader>> opened = LineReader::Open(path);
  if (!opened.ok()) return opened.status();
  LineReader& lines = **opened;

  std::string_view line;
  core::Result<bool> got = lines.Next(&line);
  if (!got.ok()) return got.status();
  if (!*got)
    return core::Status::InvalidArgument(path + ": empty file: want the header 'start,end,kind'");
  if (line != "start,end,kind") {
    return core::Status::InvalidArgument(Where(path, 1, 1) + "header must be 'start,end,kind'");
  }

  std::vector<LabelWindow> windows;
  std::vector<std::string_view> cells;
  for (;;) {
    got = lines.Next(&line);
    if (!got.ok()) return got.status();
    if (!*got) return windows;
    if (line.empty()) continue;
    const std::int64_t n = lines.line_number();
    SplitCells(line, &cells);
    if (cells.size() != 3) {
      return core::Status::InvalidArgument(
          Where(path, n, cells.size() < 3 ? static_cast<int>(cells.size()) + 1 : 4) +
          "expected 3 cells (start,end,kind), found " + std::to_string(cells.size()));
    }
    LabelWindow window;
    core::Result<core::TimestampUs> start = ParseTimestamp(cells[0]);
    if (!start.ok())
      return core::Status::InvalidArgument(Where(path, n, 1) +
                                           "start: " + start.status().message());
    core::Result<core::TimestampUs> end = ParseTimestamp(cells[1]);
    if (!end.ok())
      return core::Status::InvalidArgument(Where(path, n, 2) + "end: " + end.status().message());
    if (*end < *start) {
      return core::Status::InvalidArgument(Where(path, n, 2) + "end " + std::string(cells[1]) +
                                           " is before start " + std::string(cells[0]));
    }
    if (!IsKindWord(cells[2])) {
      return core::Status::InvalidArgument(
          Where(path, n, 3) + "kind must be a word (letters, digits, '_', '-'), found '" +
          std::string(cells[2].substr(0, 40)) + "'");
    }
    window.start = *start;
    window.end = *end;
    window.kind = std::string(cells[2]);
    windows.push_back(std::move(window));
  }
}

std::string LabelsPathFor(std::string_view recording_path) {
  for (const std::string_view suffix : {std::string_view(".csv.gz"), std::string_view(".csv")}) {
    if (recording_path.size() > suffix.size() && recording_path.ends_with(suffix)) {
      recording_path.remove_suffix(suffix.size());
      break;
    }
  }
  return std::string(recording_path) + ".labels.csv";
}

}  // namespace nightjar::replay
