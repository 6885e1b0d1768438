#include "replay/recording_reader.h"

#include <zlib.h>

#include <algorithm>
#include <cerrno>
#include <charconv>
#include <cstring>
#include <filesystem>
#include <system_error>
#include <unordered_map>
#include <utility>

#include "replay/timestamp.h"

namespace nightjar::replay {
namespace {

// Read in chunks this big: large enough that zlib's and our per-call costs vanish, small
// enough that a reader costs little memory.
constexpr std::size_t kChunkBytes = std::size_t{64} << 10;
constexpr unsigned kZlibBufferBytes = 128u << 10;
constexpr std::size_t kMaxQuoted = 40;  // longer cells are shortened in error messages
constexpr std::string_view kUtf8Bom = "\xEF\xBB\xBF";

bool EndsWith(std::string_view text, std::string_view suffix) {
  return text.size() >= suffix.size() && text.substr(text.size() - suffix.size()) == suffix;
}

std::string Quote(std::string_view text) {
  std::string out = "'";
  out += text.substr(0, kMaxQuoted);
  if (text.size() > kMaxQuoted) out += "...";
  out += '\'';
  return out;
}

enum class NumberError { kNone, kNotANumber, kOutOfRange };

// Decimal or exponent notation, nan, inf, infinity (any case), with an optional sign.
// std::from_chars is locale-independent and exact, but rejects a leading '+'.
NumberError ParseNumber(std::string_view cell, double* value) {
  const char* first = cell.data();
  const char* last = first + cell.size();
  if (first != last && *first == '+') {
    ++first;
    if (first != last && (*first == '+' || *first == '-')) return NumberError::kNotANumber;
  }
  if (first == last) return NumberError::kNotANumber;
  const auto [end, error] = std::from_chars(first, last, *value);
  if (end != last) return NumberError::kNotANumber;
  if (error == std::errc::result_out_of_range) return NumberError::kOutOfRange;
  if (error != std::errc()) return NumberError::kNotANumber;
  return NumberError::kNone;
}

}  // namespace

void SplitCells(std::string_view line, std::vector<std::string_view>* cells) {
  cells->clear();
  std::size_t start = 0;
  for (;;) {
    const std::size_t comma = line.find(',', start);
    if (comma == std::string_view::npos) {
      cells->push_back(line.substr(start));
      return;
    }
    cells->push_back(line.substr(start, comma - start));
    start = comma + 1;
  }
}

// ---------------------------------------------------------------------------------------
// LineReader

core::Result<std::unique_ptr<LineReader>> LineReader::Open(const std::string& path,
                                                           std::size_t max_line_bytes) {
  std::error_code error;
  const std::filesystem::file_status status = std::filesystem::status(path, error);
  if (!std::filesystem::exists(status)) {
    return core::Status::NotFound("cannot open '" + path + "': no such file");
  }
  if (std::filesystem::is_directory(status)) {
    return core::Status::InvalidArgument("cannot read '" + path + "': it is a directory");
  }
  errno = 0;
  gzFile file = gzopen(path.c_str(), "rb");
  if (file == nullptr) {
    const int saved = errno;
    return core::Status::Unavailable(
        "cannot open '" + path +
        "': " + (saved != 0 ? std::generic_category().message(saved) : "out of memory"));
  }
  gzbuffer(file, kZlibBufferBytes);  // fails only after a first read, so cannot fail here
  return std::unique_ptr<LineReader>(
      new LineReader(path, file, max_line_bytes, EndsWith(path, ".gz")));
}

LineReader::LineReader(std::string path, gzFile_s* file, std::size_t max_line_bytes, bool want_gzip)
    : path_(std::move(path)),
      file_(file),
      max_line_bytes_(max_line_bytes),
      want_gzip_(want_gzip),
      buffer_(kChunkBytes) {}

LineReader::~LineReader() { gzclose_r(file_); }

void LineReader::Refill() {
  begin_ = 0;
  end_ = 0;
  const int n = gzread(file_, buffer_.data(), static_cast<unsigned>(buffer_.size()));
  int zlib_error = Z_OK;
  const char* zlib_message = gzerror(file_, &zlib_error);
  if (n < 0 || zlib_error != Z_OK) {
    // Keep the complete lines read before the damage; the partial one after the last
    // newline may be cut short, so it must not pass for a good line.
    at_eof_ = true;
    failure_reason_ = std::string("corrupt or truncated data (zlib: ") +
                      (zlib_message != nullptr ? zlib_message : "unknown error") + ")";
    if (n > 0) {
      const std::size_t last_newline =
          std::string_view(buffer_.data(), static_cast<std::size_t>(n)).rfind('\n');
      if (last_newline != std::string_view::npos) end_ = last_newline + 1;
    }
    return;
  }
  if (n == 0) {
    at_eof_ = true;
    return;
  }
  if (first_chunk_) {
    first_chunk_ = false;
    // gzdirect() is only meaningful after the first read.
    if (want_gzip_ && gzdirect(file_) == 1) {
      at_eof_ = true;
      failure_reason_ = "the name ends in .gz but the content is not gzip data";
      return;
    }
  }
  end_ = static_cast<std::size_t>(n);
}

core::Result<bool> LineReader::Next(std::string_view* line) {
  if (failed_) return failure_;
  line_.clear();
  bool have_bytes = false;
  bool have_newline = false;
  bool too_long = false;
  while (!have_newline) {
    if (begin_ == end_) {
      if (at_eof_) break;
      Refill();
      continue;
    }
    have_bytes = true;
    const char* start = buffer_.data() + begin_;
    const std::size_t available = end_ - begin_;
    const auto* newline = static_cast<const char*>(std::memchr(start, '\n', available));
    const std::size_t length =
        newline != nullptr ? static_cast<std::size_t>(newline - start) : available;
    if (!too_long) {
      // +1 leaves room for a CR that is stripped below.
      if (line_.size() + length > max_line_bytes_ + 1) {
        too_long = true;
        line_.clear();
      } else {
        line_.append(start, length);
      }
    }
    begin_ += length + (newline != nullptr ? 1 : 0);
    have_newline = newline != nullptr;
  }
  if (!have_newline && !failure_reason_.empty()) {
    failed_ = true;
    failure_ = core::Status::DataLoss(
        path_ + ": " + failure_reason_ +
        (line_number_ > 0 ? " after line " + std::to_string(line_number_) : ""));
    return failure_;
  }
  if (!have_bytes) return false;
  ++line_number_;
  if (!line_.empty() && line_.back() == '\r') line_.pop_back();
  if (line_number_ == 1 && line_.starts_with(kUtf8Bom)) line_.erase(0, kUtf8Bom.size());
  if (too_long || line_.size() > max_line_bytes_) {
    line_.clear();
    return core::Status::InvalidArgument(path_ + ":" + std::to_string(line_number_) +
                                         ":1: line longer than " + std::to_string(max_line_bytes_) +
                                         " bytes");
  }
  *line = line_;
  return true;
}

// ---------------------------------------------------------------------------------------
// RecordingReader

core::Result<std::unique_ptr<RecordingReader>> RecordingReader::Open(const std::string& path,
                                                                     const ReaderOptions& options) {
  core::Result<std::unique_ptr<LineReader>> lines = LineReader::Open(path, options.max_line_bytes);
  if (!lines.ok()) return lines.status();
  std::unique_ptr<RecordingReader> reader(new RecordingReader(std::move(lines).value(), options));
  if (core::Status status = reader->ReadHeader(); !status.ok()) return status;
  return reader;
}

RecordingReader::RecordingReader(std::unique_ptr<LineReader> lines, const ReaderOptions& options)
    : lines_(std::move(lines)), options_(options) {}

std::string RecordingReader::Where(std::int64_t line_number, std::size_t column,
                                   bool name_channel) const {
  std::string out =
      path() + ":" + std::to_string(line_number) + ":" + std::to_string(column) + ": ";
  if (name_channel && column >= 2 && column - 2 < channels_.size()) {
    out += "channel '" + channels_[column - 2] + "': ";
  }
  return out;
}

core::Status RecordingReader::ReadHeader() {
  std::string_view line;
  core::Result<bool> got = lines_->Next(&line);
  if (!got.ok()) return got.status();
  if (!*got) {
    return core::Status::InvalidArgument(
        path() + ": empty file: want a header line 'timestamp,<channel>,...'");
  }
  SplitCells(line, &cells_);
  if (cells_[0] != "timestamp") {
    return core::Status::InvalidArgument(
        Where(1, 1, false) + "first column must be 'timestamp', found " + Quote(cells_[0]));
  }
  if (cells_.size() == 1) {
    return core::Status::InvalidArgument(Where(1, 2, false) +
                                         "no channel columns after 'timestamp'");
  }
  std::unordered_map<std::string_view, std::size_t> column_of;
  for (std::size_t i = 1; i < cells_.size(); ++i) {
    const std::string_view name = cells_[i];
    if (name.empty())
      return core::Status::InvalidArgument(Where(1, i + 1, false) + "empty channel name");
    if (name.find('"') != std::string_view::npos) {
      return core::Status::InvalidArgument(Where(1, i + 1, false) + "channel name " + Quote(name) +
                                           " contains '\"' (quoting is not supported)");
    }
    const auto [it, inserted] = column_of.emplace(name, i + 1);
    if (!inserted) {
      return core::Status::InvalidArgument(Where(1, i + 1, false) + "duplicate channel " +
                                           Quote(name) + " (first in column " +
                                           std::to_string(it->second) + ")");
    }
  }
  channels_.assign(cells_.begin() + 1, cells_.end());
  values_.assign(channels_.size(), std::nullopt);
  return core::Status::Ok();
}

core::Status RecordingReader::ParseRow(std::string_view line, std::int64_t line_number) {
  SplitCells(line, &cells_);
  const std::size_t want = channels_.size() + 1;
  if (cells_.size() != want) {
    return core::Status::InvalidArgument(
        Where(line_number, std::min(cells_.size(), want) + 1, false) + "expected " +
        std::to_string(want) + " cells (timestamp and " + std::to_string(channels_.size()) +
        " channels), found " + std::to_string(cells_.size()));
  }
  core::Result<core::TimestampUs> time = ParseTimestamp(cells_[0]);
  if (!time.ok())
    return core::Status::InvalidArgument(Where(line_number, 1, false) + time.status().message());
  for (std::size_t i = 0; i < channels_.size(); ++i) {
    const std::string_view cell = cells_[i + 1];
    if (cell.empty()) {
      values_[i].reset();  // no sample for this channel at this time
      continue;
    }
    double value = 0;
    switch (ParseNumber(cell, &value)) {
      case NumberError::kNone:
        values_[i] = value;
        break;
      case NumberError::kNotANumber:
        return core::Status::InvalidArgument(Where(line_number, i + 2, true) + Quote(cell) +
                                             " is not a number");
      case NumberError::kOutOfRange:
        return core::Status::InvalidArgument(Where(line_number, i + 2, true) + Quote(cell) +
                                             " is out of the range of a double");
    }
  }
  if (last_time_.has_value() && *time < *last_time_) {
    ++out_of_order_rows_;
    return core::Status::InvalidArgument(
        Where(line_number, 1, false) + "timestamp " + FormatTimestamp(*time) + " is earlier than " +
        FormatTimestamp(*last_time_) + " on line " + std::to_string(last_line_) +
        " (rows must be in time order)");
  }
  time_ = *time;
  return core::Status::Ok();
}

core::Result<bool> RecordingReader::Next(RecordingRow* row) {
  for (;;) {
    std::string_view line;
    core::Status problem;
    core::Result<bool> got = lines_->Next(&line);
    if (!got.ok()) {
      if (lines_->failed()) return got.status();  // unreadable from here on
      problem = got.status();                     // an overlong line: a bad row
    } else if (!*got) {
      return false;
    } else if (line.empty()) {
      continue;  // a blank line carries no row
    } else {
      problem = ParseRow(line, lines_->line_number());
    }
    if (problem.ok()) {
      if (last_time_.has_value() && time_ == *last_time_) ++repeated_timestamps_;
      last_time_ = time_;
      last_line_ = lines_->line_number();
      ++rows_read_;
      row->time = time_;
      row->values = values_;
      row->line = last_line_;
      return true;
    }
    ++skipped_rows_;
    if (first_skip_reason_.empty()) first_skip_reason_ = problem.message();
    if (!options_.skip_bad_rows) return problem;
  }
}

}  // namespace nightjar::replay
