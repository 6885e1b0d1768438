// Streaming reader for recorded sensor days (CSV, plain or gzip), the replay input.
//
// A recording is a CSV file: a header `timestamp,<channel>,...` and one row per instant;
// an empty cell means "no sample for that channel at that time". The full format, with
// every rule the reader enforces, is in replay_data/FORMAT.md. Rows are read one at a
// time; memory stays at one line plus one row of values however long the file is.
//
// Clocks lie (DESIGN-NOTES §6), so time order is defined here:
//  * a row whose timestamp equals the previous delivered row's is passed through and
//    counted in repeated_timestamps(); the engine counts and drops the duplicate sample
//    per channel;
//  * a row earlier than the previous delivered row is a bad row (an error naming the
//    line, or with skip_bad_rows counted in skipped_rows() and out_of_order_rows() and
//    not delivered). Later rows are compared with the last delivered row, so after a
//    backward clock jump rows are skipped until the clock passes its old high point.
//
// Errors name the place as `<path>:<line>:<column>:`, line and column 1-based, where the
// column is the field number (1 = timestamp, 2 = first channel), then the channel name
// when the cell belongs to one, then the reason.
//
// Thread-safety: none; a reader belongs to one thread. Different readers are
// independent. Ownership: Open() returns a unique_ptr the caller owns; spans and views
// handed out point into the reader and stay valid until its next Next() call.
#pragma once

#include <cstddef>
#include <cstdint>
#include <memory>
#include <optional>
#include <span>
#include <string>
#include <string_view>
#include <vector>

#include "core/status.h"
#include "core/time.h"

struct gzFile_s;  // zlib's file handle; kept out of this header

namespace nightjar::replay {

// Longest line accepted by default, in bytes (line end excluded): 16 MiB, room for some
// hundred thousand channels while a file without newlines cannot eat all memory.
inline constexpr std::size_t kDefaultMaxLineBytes = std::size_t{16} << 20;

// Text lines of a file, plain or gzip-compressed, read in fixed-size chunks.
//
// Lines end at LF; a CR before the LF is removed (CRLF files), and a UTF-8 byte-order
// mark at the start of line 1 is removed. The last line needs no final newline. A file
// whose name ends in ".gz" must hold gzip data (an error otherwise); any other file is
// read as it is, except that gzip data is decompressed whatever the name.
class LineReader {
 public:
  // NotFound if `path` does not exist, InvalidArgument if it is a directory, Unavailable
  // if it cannot be opened.
  static core::Result<std::unique_ptr<LineReader>> Open(
      const std::string& path, std::size_t max_line_bytes = kDefaultMaxLineBytes);

  ~LineReader();
  LineReader(const LineReader&) = delete;
  LineReader& operator=(const LineReader&) = delete;

  // Sets *line to the next line (valid until the next call) and returns true, or returns
  // false at the end of the file. Errors:
  //  * a line longer than max_line_bytes: InvalidArgument "<path>:<line>:1: ..."; the
  //    line is consumed and the next call goes on with the line after it;
  //  * a read or decompression error (e.g. a truncated .gz): DataLoss naming the path
  //    and line; failed() turns true and every later call returns the same error.
  core::Result<bool> Next(std::string_view* line);

  // 1-based number of the line Next() last returned or reported; 0 before the first.
  std::int64_t line_number() const { return line_number_; }
  // True after a read or decompression error; the reader is then at its end.
  bool failed() const { return failed_; }
  const std::string& path() const { return path_; }

 private:
  LineReader(std::string path, gzFile_s* file, std::size_t max_line_bytes, bool want_gzip);
  // Reads the next chunk into buffer_; sets at_eof_ at the end, and failure_reason_ (with
  // at_eof_) on a read or decompression error.
  void Refill();

  std::string path_;
  gzFile_s* file_;  // owned; closed by the destructor
  std::size_t max_line_bytes_;
  bool want_gzip_;  // name ends in .gz: the content must be gzip
  std::vector<char> buffer_;
  std::size_t begin_ = 0;  // unread bytes of buffer_ are [begin_, end_)
  std::size_t end_ = 0;
  bool at_eof_ = false;
  bool first_chunk_ = true;
  std::string line_;
  std::int64_t line_number_ = 0;
  std::string failure_reason_;  // set by Refill; reported once the good lines are out
  bool failed_ = false;         // the failure has been reported
  core::Status failure_;
};

struct ReaderOptions {
  // false (default): a bad row makes Next() return an error naming the line and column.
  // true: bad rows are counted in skipped_rows() and left out; Next() goes on. Header
  // problems and read errors are never skipped.
  bool skip_bad_rows = false;
  // Longest line accepted, in bytes, line end excluded. A longer row is a bad row.
  std::size_t max_line_bytes = kDefaultMaxLineBytes;
};

// One row as delivered. `values[i]` is the cell of channels()[i]: empty optional for an
// empty cell, else the number (NaN and infinities included; the engine flags them).
struct RecordingRow {
  core::TimestampUs time = 0;
  std::span<const std::optional<double>> values;  // points into the reader
  std::int64_t line = 0;                          // 1-based line in the file
};

class RecordingReader {
 public:
  // Opens `path` and reads the header. NotFound if the file does not exist;
  // InvalidArgument naming path:line:column for an empty file, a first column other
  // than `timestamp`, no channel columns, an empty or duplicate channel name, or a '"'
  // in a name (quoting is not supported); DataLoss for an unreadable file.
  static core::Result<std::unique_ptr<RecordingReader>> Open(const std::string& path,
                                                             const ReaderOptions& options = {});

  // Reads the next row into *row and returns true; false at the end of the file. A bad
  // row (wrong number of cells, a bad timestamp, a cell that is not a number, a time
  // earlier than the previous row, a line that is too long) returns InvalidArgument
  // naming path:line:column, the channel and the reason, unless skip_bad_rows; the bad
  // row is consumed either way, so calling Next() again goes on with the next line.
  // A read or decompression error returns DataLoss, then the same error on every call.
  // Blank lines (nothing, or only a CR) carry no row and are passed over.
  core::Result<bool> Next(RecordingRow* row);

  const std::string& path() const { return lines_->path(); }
  // Channel names in column order (column 2 onwards).
  const std::vector<std::string>& channels() const { return channels_; }

  // Rows delivered by Next().
  std::int64_t rows_read() const { return rows_read_; }
  // Bad rows not delivered: skipped under skip_bad_rows, or reported as errors.
  std::int64_t skipped_rows() const { return skipped_rows_; }
  // The part of skipped_rows() that was out of time order.
  std::int64_t out_of_order_rows() const { return out_of_order_rows_; }
  // Delivered rows whose timestamp equals the previous delivered row's.
  std::int64_t repeated_timestamps() const { return repeated_timestamps_; }
  // The error message of the first bad row; empty while there is none. Lets a replay
  // that skips bad rows still say why it skipped.
  const std::string& first_skip_reason() const { return first_skip_reason_; }

 private:
  RecordingReader(std::unique_ptr<LineReader> lines, const ReaderOptions& options);
  core::Status ReadHeader();
  // Parses one data line into time_ and values_, checking time order.
  core::Status ParseRow(std::string_view line, std::int64_t line_number);
  // "<path>:<line>:<column>: ", plus "channel '<name>': " if name_channel and the
  // column is a channel's.
  std::string Where(std::int64_t line_number, std::size_t column, bool name_channel) const;

  std::unique_ptr<LineReader> lines_;
  ReaderOptions options_;
  std::vector<std::string> channels_;
  std::vector<std::string_view> cells_;  // the current line split at commas
  std::vector<std::optional<double>> values_;
  core::TimestampUs time_ = 0;
  std::optional<core::TimestampUs> last_time_;  // of the last delivered row
  std::int64_t last_line_ = 0;
  std::int64_t rows_read_ = 0;
  std::int64_t skipped_rows_ = 0;
  std::int64_t out_of_order_rows_ = 0;
  std::int64_t repeated_timestamps_ = 0;
  std::string first_skip_reason_;
};

// Splits `line` at every comma into `cells` (cleared first). No quoting: a comma always
// separates. An empty line gives one empty cell.
void SplitCells(std::string_view line, std::vector<std::string_view>* cells);

}  // namespace nightjar::replay
