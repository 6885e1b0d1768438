// Reads real files of the open labelled datasets in ../shared/datasets (SKAB, NAB, TEP;
// see its MANIFEST.md). A missing file fails the test.
#include <gtest/gtest.h>

#include <cstdint>
#include <filesystem>
#include <fstream>
#include <string>
#include <vector>

#include "replay/labels.h"
#include "replay/recording_reader.h"
#include "support/reference_data.h"

namespace nightjar::replay {
namespace {

struct LineCount {
  std::int64_t data_rows = 0;  // non-empty lines after the header
  std::size_t header_cells = 0;
};

// Counts the file's lines with plain iostreams, independently of the reader.
LineCount CountLines(const std::filesystem::path& path) {
  LineCount count;
  std::ifstream in(path);
  EXPECT_TRUE(in.good()) << "cannot read " << path;
  std::string line;
  bool header = true;
  while (std::getline(in, line)) {
    if (header) {
      count.header_cells = 1;
      for (const char c : line) count.header_cells += c == ',' ? 1 : 0;
      header = false;
    } else if (!line.empty()) {
      ++count.data_rows;
    }
  }
  return count;
}

struct Summary {
  core::Status status;
  std::size_t channels = 0;
  std::int64_t rows = 0;
  std::int64_t skipped = 0;
  std::int64_t out_of_order = 0;
  std::int64_t repeated = 0;
  core::TimestampUs first = 0;
  core::TimestampUs last = 0;
};

Summary ReadDataset(const std::filesystem::path& path, const ReaderOptions& options = {}) {
  Summary summary;
  EXPECT_TRUE(std::filesystem::exists(path)) << "missing dataset file " << path;
  core::Result<std::unique_ptr<RecordingReader>> reader =
      RecordingReader::Open(path.string(), options);
  if (!reader.ok()) {
    summary.status = reader.status();
    return summary;
  }
  summary.channels = (*reader)->channels().size();
  RecordingRow row;
  for (;;) {
    core::Result<bool> got = (*reader)->Next(&row);
    if (!got.ok()) {
      summary.status = got.status();
      break;
    }
    if (!*got) break;
    if (summary.rows == 0) summary.first = row.time;
    summary.last = row.time;
    EXPECT_EQ(row.values.size(), summary.channels);
    ++summary.rows;
  }
  summary.skipped = (*reader)->skipped_rows();
  summary.out_of_order = (*reader)->out_of_order_rows();
  summary.repeated = (*reader)->repeated_timestamps();
  return summary;
}

void ExpectReadsWhole(const std::string& name, std::size_t channels, std::size_t windows) {
  SCOPED_TRACE(name);
  const std::filesystem::path path = testing::SharedDir() / "datasets" / (name + ".csv");
  const LineCount count = CountLines(path);
  const Summary summary = ReadDataset(path);
  ASSERT_TRUE(summary.status.ok()) << summary.status.message();
  EXPECT_EQ(summary.channels + 1, count.header_cells);
  EXPECT_EQ(summary.channels, channels);
  EXPECT_EQ(summary.rows, count.data_rows);
  EXPECT_GT(summary.rows, 0);
  EXPECT_EQ(summary.skipped, 0);

  const std::string labels_path = LabelsPathFor(path.string());
  EXPECT_EQ(labels_path, (testing::SharedDir() / "datasets" / (name + ".labels.csv")).string());
  core::Result<std::vector<LabelWindow>> labels = ReadLabels(labels_path);
  ASSERT_TRUE(labels.ok()) << labels.status().message();
  EXPECT_EQ(labels->size(), windows);
  for (const LabelWindow& window : *labels) {
    EXPECT_EQ(window.kind, "anomaly");
    EXPECT_LE(summary.first, window.start);
    EXPECT_LE(window.end, summary.last);
  }
}

// Channel and window counts as listed in the datasets' MANIFEST.md.
TEST(OpenDatasetsTest, SkabValveRun) { ExpectReadsWhole("skab_valve1_02", 8, 1); }
TEST(OpenDatasetsTest, TepFaultRun) { ExpectReadsWhole("tep_d02_te", 52, 1); }
TEST(OpenDatasetsTest, NabTaxiSeries) { ExpectReadsWhole("nab_realKnownCause_nyc_taxi", 1, 5); }

// The manifest lists 11 repeated timestamps here: passed through, not errors.
TEST(OpenDatasetsTest, RepeatedTimestampsPassThrough) {
  const std::filesystem::path path =
      testing::SharedDir() / "datasets" / "nab_server_network_in_5abac7.csv";
  const Summary summary = ReadDataset(path);
  ASSERT_TRUE(summary.status.ok()) << summary.status.message();
  EXPECT_EQ(summary.rows, CountLines(path).data_rows);
  EXPECT_EQ(summary.repeated, 11);
}

// The manifest lists one backward clock step here. Strict reading stops at it, naming
// the line; skipping reading drops the rows before the clock regains its high point.
TEST(OpenDatasetsTest, BackwardClockStep) {
  const std::filesystem::path path = testing::SharedDir() / "datasets" /
                                     "nab_realKnownCause_machine_temperature_system_failure.csv";
  const LineCount count = CountLines(path);
  const Summary strict = ReadDataset(path);
  ASSERT_FALSE(strict.status.ok());
  EXPECT_NE(strict.status.message().find(path.string() + ":"), std::string::npos);
  EXPECT_NE(strict.status.message().find("is earlier than"), std::string::npos)
      << strict.status.message();
  // Where the step is and how many rows lie below the earlier high point: found by a
  // separate scan of the file (a small Python loop comparing each time with the maximum).
  EXPECT_NE(strict.status.message().find(path.string() + ":10151:1: timestamp "), std::string::npos)
      << strict.status.message();

  ReaderOptions options;
  options.skip_bad_rows = true;
  const Summary skipping = ReadDataset(path, options);
  ASSERT_TRUE(skipping.status.ok()) << skipping.status.message();
  EXPECT_EQ(skipping.out_of_order, 11);
  EXPECT_EQ(skipping.skipped, skipping.out_of_order);
  EXPECT_EQ(skipping.rows + skipping.skipped, count.data_rows);
}

}  // namespace
}  // namespace nightjar::replay
