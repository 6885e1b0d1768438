#include "replay/recording_reader.h"

#include <gtest/gtest.h>
#include <zlib.h>

#include <cmath>
#include <cstdint>
#include <filesystem>
#include <fstream>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

namespace nightjar::replay {
namespace {

constexpr core::TimestampUs kUs = core::kMicrosPerSecond;
constexpr core::TimestampUs kDay = 1773014400 * kUs;  // 2026-03-09T00:00:00Z

// A file name unique to the running test, so tests may run in parallel.
std::string TempPath(const std::string& name) {
  const ::testing::TestInfo* info = ::testing::UnitTest::GetInstance()->current_test_info();
  return ::testing::TempDir() + "nightjar_replay_" + info->test_suite_name() + "_" + info->name() +
         "_" + name;
}

std::string WriteText(const std::string& name, std::string_view content) {
  std::string path = TempPath(name);
  std::ofstream out(path, std::ios::binary | std::ios::trunc);
  out << content;
  EXPECT_TRUE(out.good()) << path;
  return path;
}

std::string WriteGzip(const std::string& name, std::string_view content) {
  std::string path = TempPath(name);
  gzFile file = gzopen(path.c_str(), "wb");
  EXPECT_NE(file, nullptr) << path;
  if (file == nullptr) return path;
  EXPECT_EQ(gzwrite(file, content.data(), static_cast<unsigned>(content.size())),
            static_cast<int>(content.size()));
  EXPECT_EQ(gzclose(file), Z_OK);
  return path;
}

struct Rows {
  std::vector<std::string> channels;
  std::vector<core::TimestampUs> times;
  std::vector<std::vector<std::optional<double>>> values;
  std::vector<std::int64_t> lines;
  core::Status status;  // the first error, if any (reading stops there)
  std::int64_t skipped = 0;
  std::int64_t out_of_order = 0;
  std::int64_t repeated = 0;
};

Rows ReadAll(const std::string& path, const ReaderOptions& options = {}) {
  Rows rows;
  core::Result<std::unique_ptr<RecordingReader>> reader = RecordingReader::Open(path, options);
  if (!reader.ok()) {
    rows.status = reader.status();
    return rows;
  }
  rows.channels = (*reader)->channels();
  RecordingRow row;
  for (;;) {
    core::Result<bool> got = (*reader)->Next(&row);
    if (!got.ok()) {
      rows.status = got.status();
      break;
    }
    if (!*got) break;
    rows.times.push_back(row.time);
    rows.values.emplace_back(row.values.begin(), row.values.end());
    rows.lines.push_back(row.line);
  }
  rows.skipped = (*reader)->skipped_rows();
  rows.out_of_order = (*reader)->out_of_order_rows();
  rows.repeated = (*reader)->repeated_timestamps();
  EXPECT_EQ((*reader)->rows_read(), static_cast<std::int64_t>(rows.times.size()));
  return rows;
}

// Expects reading `content` to fail with a message holding "<path>:<where>: " and `why`.
void ExpectError(const std::string& content, const std::string& where, const std::string& why) {
  const std::string path = WriteText("bad.csv", content);
  const Rows rows = ReadAll(path);
  ASSERT_FALSE(rows.status.ok()) << "no error for:\n" << content;
  EXPECT_EQ(rows.status.code(), core::StatusCode::kInvalidArgument);
  EXPECT_NE(rows.status.message().find(path + ":" + where + ": "), std::string::npos)
      << rows.status.message();
  EXPECT_NE(rows.status.message().find(why), std::string::npos) << rows.status.message();
}

constexpr std::string_view kSimple =
    "timestamp,a,b,c\n"
    "2026-03-09T00:00:00Z,1.5,,-2e3\n"
    "2026-03-09T00:00:01Z,nan,inf,-Infinity\n"
    "2026-03-09T00:00:01.5Z,+0.25,1E-3,\n"
    "2026-03-09T00:00:02+00:00,,,\n";

void ExpectSimpleRows(const Rows& rows) {
  ASSERT_TRUE(rows.status.ok()) << rows.status.message();
  EXPECT_EQ(rows.channels, (std::vector<std::string>{"a", "b", "c"}));
  ASSERT_EQ(rows.times.size(), 4u);
  EXPECT_EQ(rows.times[0], kDay);
  EXPECT_EQ(rows.times[1], kDay + kUs);
  EXPECT_EQ(rows.times[2], kDay + kUs + kUs / 2);
  EXPECT_EQ(rows.times[3], kDay + 2 * kUs);
  EXPECT_EQ(rows.lines, (std::vector<std::int64_t>{2, 3, 4, 5}));
  ASSERT_EQ(rows.values[0].size(), 3u);
  EXPECT_EQ(rows.values[0][0], 1.5);
  EXPECT_FALSE(rows.values[0][1].has_value());  // empty cell: no sample
  EXPECT_EQ(rows.values[0][2], -2000.0);
  ASSERT_TRUE(rows.values[1][0] && rows.values[1][1] && rows.values[1][2]);
  EXPECT_TRUE(std::isnan(*rows.values[1][0]));
  EXPECT_EQ(*rows.values[1][1], INFINITY);
  EXPECT_EQ(*rows.values[1][2], -INFINITY);
  EXPECT_EQ(rows.values[2][0], 0.25);
  EXPECT_EQ(rows.values[2][1], 0.001);
  EXPECT_FALSE(rows.values[2][2].has_value());
  for (const auto& value : rows.values[3]) EXPECT_FALSE(value.has_value());
  EXPECT_EQ(rows.skipped, 0);
}

TEST(RecordingReaderTest, ReadsNumbersAndEmptyCells) {
  ExpectSimpleRows(ReadAll(WriteText("simple.csv", kSimple)));
}

TEST(RecordingReaderTest, ReadsGzipLikePlain) {
  ExpectSimpleRows(ReadAll(WriteGzip("simple.csv.gz", kSimple)));
  // Content decides, not the name: gzip data in a .csv file is decompressed too.
  ExpectSimpleRows(ReadAll(WriteGzip("simple_gz_inside.csv", kSimple)));
}

TEST(RecordingReaderTest, HandlesCrlfBomAndMissingFinalNewline) {
  std::string content = "\xEF\xBB\xBF";
  for (const char c : std::string(kSimple)) {
    if (c == '\n') content += '\r';
    content += c;
  }
  content.resize(content.size() - 2);  // drop the final CRLF
  ExpectSimpleRows(ReadAll(WriteText("crlf.csv", content)));
  ExpectSimpleRows(ReadAll(WriteGzip("crlf.csv.gz", content)));
}

TEST(RecordingReaderTest, SkipsBlankLinesButCountsThemInLineNumbers) {
  const Rows rows = ReadAll(WriteText("blank.csv",
                                      "timestamp,a\n"
                                      "\n"
                                      "2026-03-09T00:00:00Z,1\n"
                                      "\r\n"
                                      "2026-03-09T00:00:01Z,2\n"
                                      "\n"));
  ASSERT_TRUE(rows.status.ok()) << rows.status.message();
  EXPECT_EQ(rows.lines, (std::vector<std::int64_t>{3, 5}));
}

TEST(RecordingReaderTest, StreamsALargeGzipFile) {
  // 20000 rows across many 64 KiB chunks; every value must survive chunk boundaries.
  std::string content = "timestamp,x,y\n";
  const int n = 20000;
  for (int i = 0; i < n; ++i) {
    content += "2026-03-09T" + std::string(i / 3600 < 10 ? "0" : "") + std::to_string(i / 3600) +
               ":" + (i / 60 % 60 < 10 ? "0" : "") + std::to_string(i / 60 % 60) + ":" +
               (i % 60 < 10 ? "0" : "") + std::to_string(i % 60) + "Z," + std::to_string(i) + "," +
               (i % 7 == 0 ? "" : std::to_string(-i) + ".5") + "\n";
  }
  const Rows rows = ReadAll(WriteGzip("large.csv.gz", content));
  ASSERT_TRUE(rows.status.ok()) << rows.status.message();
  ASSERT_EQ(rows.times.size(), static_cast<std::size_t>(n));
  for (int i = 0; i < n; ++i) {
    ASSERT_EQ(rows.times[static_cast<std::size_t>(i)], kDay + i * kUs);
    ASSERT_EQ(rows.values[static_cast<std::size_t>(i)][0], static_cast<double>(i));
    if (i % 7 == 0) {
      ASSERT_FALSE(rows.values[static_cast<std::size_t>(i)][1].has_value());
    } else {
      ASSERT_EQ(rows.values[static_cast<std::size_t>(i)][1], -i - 0.5);
    }
  }
}

TEST(RecordingReaderTest, ReadsVeryLongLines) {
  // About 300 KB per line: several read chunks and zlib buffers.
  const int channels = 40000;
  std::string header = "timestamp";
  std::string row = "2026-03-09T00:00:00Z";
  for (int i = 0; i < channels; ++i) {
    // Appended piece by piece: GCC 12 warns falsely (-Wrestrict) on "," + std::string.
    header += ",channel_";
    header += std::to_string(i);
    row += ',';
    row += std::to_string(i);
  }
  const std::string content = header + "\n" + row + "\n";
  for (const std::string& path :
       {WriteText("long.csv", content), WriteGzip("long.csv.gz", content)}) {
    const Rows rows = ReadAll(path);
    ASSERT_TRUE(rows.status.ok()) << rows.status.message();
    ASSERT_EQ(rows.channels.size(), static_cast<std::size_t>(channels));
    EXPECT_EQ(rows.channels.back(), "channel_39999");
    ASSERT_EQ(rows.values.size(), 1u);
    EXPECT_EQ(rows.values[0].back(), 39999.0);
  }
}

TEST(RecordingReaderTest, LineLongerThanTheLimitIsABadRow) {
  ReaderOptions options;
  options.max_line_bytes = 40;
  const std::string content =
      "timestamp,a\n"
      "2026-03-09T00:00:00Z,1\n"
      "2026-03-09T00:00:01Z,1.00000000000000000000000000000000000000001\n"
      "2026-03-09T00:00:02Z,3\n";
  const std::string path = WriteText("limit.csv", content);
  core::Result<std::unique_ptr<RecordingReader>> reader = RecordingReader::Open(path, options);
  ASSERT_TRUE(reader.ok()) << reader.status().message();
  RecordingRow row;
  ASSERT_TRUE(*(*reader)->Next(&row));
  core::Result<bool> got = (*reader)->Next(&row);
  ASSERT_FALSE(got.ok());
  EXPECT_NE(got.status().message().find(path + ":3:1: line longer than 40 bytes"),
            std::string::npos)
      << got.status().message();
  // The overlong line was consumed; reading goes on after it.
  got = (*reader)->Next(&row);
  ASSERT_TRUE(got.ok()) << got.status().message();
  ASSERT_TRUE(*got);
  EXPECT_EQ(row.line, 4);
  EXPECT_EQ(row.values[0], 3.0);

  options.skip_bad_rows = true;
  const Rows rows = ReadAll(path, options);
  ASSERT_TRUE(rows.status.ok()) << rows.status.message();
  EXPECT_EQ(rows.lines, (std::vector<std::int64_t>{2, 4}));
  EXPECT_EQ(rows.skipped, 1);
}

TEST(RecordingReaderTest, HeaderErrorsNameLineAndColumn) {
  ExpectError("time,a\n", "1:1", "first column must be 'timestamp', found 'time'");
  ExpectError("a,timestamp\n", "1:1", "first column must be 'timestamp'");
  ExpectError("timestamp\n2026-03-09T00:00:00Z\n", "1:2", "no channel columns");
  ExpectError("timestamp,a,,b\n", "1:3", "empty channel name");
  ExpectError("timestamp,a,\n", "1:3", "empty channel name");
  ExpectError("timestamp,a,b,a\n", "1:4", "duplicate channel 'a' (first in column 2)");
  ExpectError("timestamp,\"a\"\n", "1:2", "quoting is not supported");
  ExpectError("\ntimestamp,a\n", "1:1", "first column must be 'timestamp'");
}

TEST(RecordingReaderTest, EmptyAndMissingFiles) {
  const std::string empty = WriteText("empty.csv", "");
  Rows rows = ReadAll(empty);
  EXPECT_EQ(rows.status.code(), core::StatusCode::kInvalidArgument);
  EXPECT_NE(rows.status.message().find(empty + ": empty file"), std::string::npos);

  rows = ReadAll(WriteGzip("empty.csv.gz", ""));
  EXPECT_FALSE(rows.status.ok());

  const std::string missing = TempPath("does_not_exist.csv");
  rows = ReadAll(missing);
  EXPECT_EQ(rows.status.code(), core::StatusCode::kNotFound);
  EXPECT_NE(rows.status.message().find(missing), std::string::npos);

  rows = ReadAll(::testing::TempDir());
  EXPECT_EQ(rows.status.code(), core::StatusCode::kInvalidArgument);
  EXPECT_NE(rows.status.message().find("directory"), std::string::npos);
}

TEST(RecordingReaderTest, HeaderOnlyHasNoRows) {
  const Rows rows = ReadAll(WriteText("header_only.csv", "timestamp,a,b"));
  ASSERT_TRUE(rows.status.ok()) << rows.status.message();
  EXPECT_EQ(rows.channels.size(), 2u);
  EXPECT_TRUE(rows.times.empty());
}

TEST(RecordingReaderTest, RowErrorsNameLineColumnAndChannel) {
  const std::string head = "timestamp,flow,level\n2026-03-09T00:00:00Z,1,2\n";
  ExpectError(head + "2026-03-09T00:00:01Z,1\n", "3:3",
              "expected 3 cells (timestamp and 2 channels), found 2");
  ExpectError(head + "2026-03-09T00:00:01Z,1,2,3\n", "3:4", "found 4");
  ExpectError(head + "2026-03-09T00:00:01Z,1,2,\n", "3:4", "found 4");
  ExpectError(head + "2026-03-09T00:00:01Z\n", "3:2", "found 1");
  ExpectError(head + "2026-03-09T00:00:01Z,abc,2\n", "3:2",
              "channel 'flow': 'abc' is not a number");
  ExpectError(head + "2026-03-09T00:00:01Z,1,2x\n", "3:3", "channel 'level': '2x' is not a number");
  ExpectError(head + "2026-03-09T00:00:01Z,1, 2\n", "3:3", "channel 'level': ' 2' is not a number");
  ExpectError(head + "2026-03-09T00:00:01Z,1,+-2\n", "3:3", "is not a number");
  ExpectError(head + "2026-03-09T00:00:01Z,1,0x10\n", "3:3", "is not a number");
  ExpectError(head + "2026-03-09T00:00:01Z,1,\"2\"\n", "3:3", "is not a number");
  ExpectError(head + "2026-03-09T00:00:01Z,1e999,2\n", "3:2",
              "channel 'flow': '1e999' is out of the range");
  ExpectError(head + "2026-03-09 00:00:01,1,2\n", "3:1", "bad timestamp '2026-03-09 00:00:01'");
  ExpectError(head + "2026-03-09T00:00:01+02:00,1,2\n", "3:1", "zone must be Z or +00:00");
  ExpectError(head + ",1,2\n", "3:1", "bad timestamp ''");
  ExpectError(head + "2026-03-08T23:59:59Z,1,2\n", "3:1",
              "timestamp 2026-03-08T23:59:59Z is earlier than 2026-03-09T00:00:00Z on line 2");
}

TEST(RecordingReaderTest, StrictModeReportsABadRowAndGoesOn) {
  const std::string path = WriteText("strict.csv",
                                     "timestamp,a\n"
                                     "2026-03-09T00:00:00Z,1\n"
                                     "2026-03-09T00:00:01Z,oops\n"
                                     "2026-03-09T00:00:02Z,3\n");
  core::Result<std::unique_ptr<RecordingReader>> reader = RecordingReader::Open(path);
  ASSERT_TRUE(reader.ok());
  RecordingRow row;
  ASSERT_TRUE(*(*reader)->Next(&row));
  core::Result<bool> got = (*reader)->Next(&row);
  ASSERT_FALSE(got.ok());
  EXPECT_NE(got.status().message().find(path + ":3:2: channel 'a'"), std::string::npos);
  got = (*reader)->Next(&row);
  ASSERT_TRUE(got.ok() && *got);
  EXPECT_EQ(row.line, 4);
  EXPECT_EQ((*reader)->rows_read(), 2);
  EXPECT_EQ((*reader)->skipped_rows(), 1);
  EXPECT_NE((*reader)->first_skip_reason().find(path + ":3:2:"), std::string::npos);
  EXPECT_FALSE(*(*reader)->Next(&row));
}

TEST(RecordingReaderTest, SkipBadRowsCountsAndGoesOn) {
  ReaderOptions options;
  options.skip_bad_rows = true;
  const std::string path = WriteText("skip.csv",
                                     "timestamp,a,b\n"
                                     "2026-03-09T00:00:00Z,1,1\n"
                                     "2026-03-09T00:00:01Z,x,1\n"  // not a number
                                     "2026-03-09T00:00:02Z,1\n"    // too few cells
                                     "2026-03-09T00:00:03,1,1\n"   // no zone
                                     "2026-03-09T00:00:04Z,4,4\n"
                                     "2026-03-09T00:00:03Z,3,3\n"  // backwards
                                     "2026-03-09T00:00:04Z,5,5\n"  // repeat: kept
                                     "2026-03-09T00:00:05Z,6,6\n");
  const Rows rows = ReadAll(path, options);
  ASSERT_TRUE(rows.status.ok()) << rows.status.message();
  EXPECT_EQ(rows.lines, (std::vector<std::int64_t>{2, 6, 8, 9}));
  EXPECT_EQ(rows.skipped, 4);
  EXPECT_EQ(rows.out_of_order, 1);
  EXPECT_EQ(rows.repeated, 1);
  core::Result<std::unique_ptr<RecordingReader>> reader = RecordingReader::Open(path, options);
  ASSERT_TRUE(reader.ok());
  RecordingRow row;
  while (*(*reader)->Next(&row)) {
  }
  EXPECT_NE((*reader)->first_skip_reason().find(path + ":3:2: channel 'a': 'x' is not a number"),
            std::string::npos)
      << (*reader)->first_skip_reason();
}

TEST(RecordingReaderTest, BackwardJumpSkipsUntilTheClockPassesItsHighPoint) {
  ReaderOptions options;
  options.skip_bad_rows = true;
  const Rows rows = ReadAll(WriteText("jump.csv",
                                      "timestamp,a\n"
                                      "2026-03-09T00:00:10Z,1\n"
                                      "2026-03-09T00:00:05Z,2\n"
                                      "2026-03-09T00:00:06Z,3\n"
                                      "2026-03-09T00:00:10Z,4\n"
                                      "2026-03-09T00:00:11Z,5\n"),
                            options);
  ASSERT_TRUE(rows.status.ok());
  EXPECT_EQ(rows.lines, (std::vector<std::int64_t>{2, 5, 6}));
  EXPECT_EQ(rows.out_of_order, 2);
  EXPECT_EQ(rows.repeated, 1);
}

TEST(RecordingReaderTest, RepeatedTimestampsArePassedThrough) {
  const Rows rows = ReadAll(WriteText("repeat.csv",
                                      "timestamp,a\n"
                                      "2026-03-09T00:00:00Z,1\n"
                                      "2026-03-09T00:00:00Z,2\n"
                                      "2026-03-09T00:00:00.000000Z,3\n"
                                      "2026-03-09T00:00:01Z,4\n"));
  ASSERT_TRUE(rows.status.ok()) << rows.status.message();
  ASSERT_EQ(rows.times.size(), 4u);
  EXPECT_EQ(rows.times[2], rows.times[0]);
  EXPECT_EQ(rows.values[2][0], 3.0);
  EXPECT_EQ(rows.repeated, 2);
  EXPECT_EQ(rows.skipped, 0);
}

// Writes a gzip file of `rows` noisy rows and returns its path and the text.
std::string NoisyContent(int rows) {
  std::string content = "timestamp,a,b\n";
  std::uint32_t state = 12345;  // a fixed LCG: incompressible enough, reproducible
  for (int i = 0; i < rows; ++i) {
    state = state * 1664525u + 1013904223u;
    content += "2026-03-09T00:00:00." + std::string(6 - std::to_string(i).size(), '0') +
               std::to_string(i) + "Z," + std::to_string(state % 100000) + "," +
               std::to_string(state / 100000) + "\n";
  }
  return content;
}

TEST(RecordingReaderTest, TruncatedGzipIsDataLossAndDeliversNoCutRow) {
  const int n = 20000;
  const std::string content = NoisyContent(n);
  const std::string path = WriteGzip("truncated.csv.gz", content);
  const std::uintmax_t size = std::filesystem::file_size(path);
  std::filesystem::resize_file(path, size / 2);

  core::Result<std::unique_ptr<RecordingReader>> reader = RecordingReader::Open(path);
  ASSERT_TRUE(reader.ok()) << reader.status().message();
  const Rows full = ReadAll(WriteText("full.csv", content));
  ASSERT_EQ(full.times.size(), static_cast<std::size_t>(n));
  RecordingRow row;
  std::size_t i = 0;
  core::Result<bool> got = true;
  for (; (got = (*reader)->Next(&row)).ok() && *got; ++i) {
    // Every delivered row is intact.
    ASSERT_LT(i, full.times.size());
    ASSERT_EQ(row.time, full.times[i]);
    ASSERT_EQ(row.values[0], full.values[i][0]);
    ASSERT_EQ(row.values[1], full.values[i][1]);
  }
  ASSERT_FALSE(got.ok());
  EXPECT_EQ(got.status().code(), core::StatusCode::kDataLoss);
  EXPECT_NE(got.status().message().find(path + ": corrupt or truncated data"), std::string::npos)
      << got.status().message();
  EXPECT_GT(i, 1000u);
  EXPECT_LT(i, static_cast<std::size_t>(n));
  // The failure is sticky, also under skip_bad_rows.
  got = (*reader)->Next(&row);
  EXPECT_EQ(got.status().code(), core::StatusCode::kDataLoss);

  ReaderOptions skip;
  skip.skip_bad_rows = true;
  EXPECT_EQ(ReadAll(path, skip).status.code(), core::StatusCode::kDataLoss);
}

TEST(RecordingReaderTest, CorruptGzipIsDataLoss) {
  const std::string path = WriteGzip("corrupt.csv.gz", NoisyContent(20000));
  {
    std::fstream file(path, std::ios::in | std::ios::out | std::ios::binary);
    const auto size = static_cast<std::streamoff>(std::filesystem::file_size(path));
    for (std::streamoff at = size / 3; at < size / 3 + 64; ++at) {
      file.seekp(at);
      file.put('\x55');
    }
  }
  ReaderOptions skip;
  skip.skip_bad_rows = true;
  const Rows rows = ReadAll(path, skip);
  EXPECT_EQ(rows.status.code(), core::StatusCode::kDataLoss) << rows.status.message();
  EXPECT_NE(rows.status.message().find(path), std::string::npos);
}

TEST(RecordingReaderTest, GzNameWithPlainContentIsAnError) {
  const Rows rows = ReadAll(WriteText("plain.csv.gz", kSimple));
  EXPECT_EQ(rows.status.code(), core::StatusCode::kDataLoss);
  EXPECT_NE(rows.status.message().find("not gzip data"), std::string::npos)
      << rows.status.message();
}

TEST(SplitCellsTest, SplitsAtEveryComma) {
  std::vector<std::string_view> cells;
  SplitCells("", &cells);
  EXPECT_EQ(cells, (std::vector<std::string_view>{""}));
  SplitCells("a,,b,", &cells);
  EXPECT_EQ(cells, (std::vector<std::string_view>{"a", "", "b", ""}));
}

}  // namespace
}  // namespace nightjar::replay
