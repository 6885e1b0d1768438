#include "replay/labels.h"

#include <gtest/gtest.h>
#include <zlib.h>

#include <fstream>
#include <string>
#include <vector>

namespace nightjar::replay {
namespace {

constexpr core::TimestampUs kUs = core::kMicrosPerSecond;
constexpr core::TimestampUs kDay = 1773014400 * kUs;  // 2026-03-09T00:00:00Z

std::string WriteText(const std::string& name, const std::string& content) {
  const ::testing::TestInfo* info = ::testing::UnitTest::GetInstance()->current_test_info();
  std::string path = ::testing::TempDir() + "nightjar_labels_" + info->name() + "_" + name;
  std::ofstream out(path, std::ios::binary | std::ios::trunc);
  out << content;
  EXPECT_TRUE(out.good()) << path;
  return path;
}

void ExpectError(const std::string& content, const std::string& where, const std::string& why) {
  const std::string path = WriteText("bad.labels.csv", content);
  core::Result<std::vector<LabelWindow>> labels = ReadLabels(path);
  ASSERT_FALSE(labels.ok()) << "no error for:\n" << content;
  EXPECT_EQ(labels.status().code(), core::StatusCode::kInvalidArgument);
  EXPECT_NE(labels.status().message().find(path + ":" + where + ": "), std::string::npos)
      << labels.status().message();
  EXPECT_NE(labels.status().message().find(why), std::string::npos) << labels.status().message();
}

TEST(LabelsTest, ReadsWindowsInFileOrder) {
  const std::string path = WriteText("day.labels.csv",
                                     "start,end,kind\n"
                                     "2026-03-09T10:30:00Z,2026-03-09T10:54:59Z,event\n"
                                     "2026-03-09T11:47:13Z,2026-03-09T11:47:13Z,anomaly\n"
                                     "2026-03-09T04:00:00Z,2026-03-09T06:00:00.5Z,valve_stick-2\n");
  core::Result<std::vector<LabelWindow>> labels = ReadLabels(path);
  ASSERT_TRUE(labels.ok()) << labels.status().message();
  ASSERT_EQ(labels->size(), 3u);
  const LabelWindow& stop = (*labels)[0];
  EXPECT_EQ(stop.start, kDay + (10 * 3600 + 30 * 60) * kUs);
  EXPECT_EQ(stop.end, kDay + (10 * 3600 + 54 * 60 + 59) * kUs);
  EXPECT_EQ(stop.kind, "event");
  // Inclusive at both ends.
  EXPECT_TRUE(stop.Contains(stop.start));
  EXPECT_TRUE(stop.Contains(stop.end));
  EXPECT_FALSE(stop.Contains(stop.end + 1));
  EXPECT_FALSE(stop.Contains(stop.start - 1));
  const LabelWindow& spike = (*labels)[1];
  EXPECT_EQ(spike.start, spike.end);  // a one-instant window
  EXPECT_TRUE(spike.Contains(spike.start));
  EXPECT_EQ((*labels)[2].end, kDay + kUs * 6 * 3600 + 500000);
  EXPECT_EQ((*labels)[2].kind, "valve_stick-2");
}

TEST(LabelsTest, HeaderOnlyMeansNoWindows) {
  for (const char* content : {"start,end,kind\n", "start,end,kind", "start,end,kind\r\n\r\n"}) {
    core::Result<std::vector<LabelWindow>> labels = ReadLabels(WriteText("none.csv", content));
    ASSERT_TRUE(labels.ok()) << labels.status().message();
    EXPECT_TRUE(labels->empty());
  }
}

TEST(LabelsTest, HandlesCrlfBomAndGzip) {
  const std::string content =
      "\xEF\xBB\xBFstart,end,kind\r\n2026-03-09T00:00:00Z,2026-03-09T00:00:01Z,anomaly";
  core::Result<std::vector<LabelWindow>> labels = ReadLabels(WriteText("crlf.csv", content));
  ASSERT_TRUE(labels.ok()) << labels.status().message();
  ASSERT_EQ(labels->size(), 1u);
  EXPECT_EQ((*labels)[0].kind, "anomaly");

  const std::string gz_path = ::testing::TempDir() + "nightjar_labels_gzip.labels.csv.gz";
  gzFile file = gzopen(gz_path.c_str(), "wb");
  ASSERT_NE(file, nullptr);
  ASSERT_EQ(gzwrite(file, content.data(), static_cast<unsigned>(content.size())),
            static_cast<int>(content.size()));
  ASSERT_EQ(gzclose(file), Z_OK);
  labels = ReadLabels(gz_path);
  ASSERT_TRUE(labels.ok()) << labels.status().message();
  EXPECT_EQ(labels->size(), 1u);
}

TEST(LabelsTest, ErrorsNameLineAndColumn) {
  const std::string head = "start,end,kind\n";
  const std::string ok = "2026-03-09T00:00:00Z,2026-03-09T00:01:00Z,anomaly\n";
  ExpectError("begin,end,kind\n", "1:1", "header must be 'start,end,kind'");
  ExpectError("start,end\n", "1:1", "header must be");
  ExpectError("start,end,kind,note\n", "1:1", "header must be");
  ExpectError(head + ok + "2026-03-09T00:00:00Z,2026-03-09T00:01:00Z\n", "3:3",
              "expected 3 cells (start,end,kind), found 2");
  ExpectError(head + ok + "2026-03-09T00:00:00Z,2026-03-09T00:01:00Z,anomaly,x\n", "3:4",
              "found 4");
  ExpectError(head + "2026-03-09T00:00Z,2026-03-09T00:01:00Z,anomaly\n", "2:1",
              "start: bad timestamp '2026-03-09T00:00Z'");
  ExpectError(head + "2026-03-09T00:00:00Z,2026-03-09T00:01:00+01:00,anomaly\n", "2:2",
              "end: bad timestamp");
  ExpectError(head + "2026-03-09T00:01:00Z,2026-03-09T00:00:59Z,anomaly\n", "2:2",
              "end 2026-03-09T00:00:59Z is before start 2026-03-09T00:01:00Z");
  ExpectError(head + "2026-03-09T00:00:00Z,2026-03-09T00:01:00Z,\n", "2:3", "kind must be a word");
  ExpectError(head + "2026-03-09T00:00:00Z,2026-03-09T00:01:00Z,bad kind\n", "2:3",
              "kind must be a word");
  ExpectError(head + "2026-03-09T00:00:00Z,2026-03-09T00:01:00Z,1st\n", "2:3",
              "kind must be a word");
}

TEST(LabelsTest, MissingFileIsNotFound) {
  const std::string path = ::testing::TempDir() + "nightjar_labels_missing.labels.csv";
  core::Result<std::vector<LabelWindow>> labels = ReadLabels(path);
  ASSERT_FALSE(labels.ok());
  EXPECT_EQ(labels.status().code(), core::StatusCode::kNotFound);
  EXPECT_NE(labels.status().message().find(path), std::string::npos);
}

TEST(LabelsTest, LabelsPathForARecording) {
  EXPECT_EQ(LabelsPathFor("replay_data/cw2_day.csv.gz"), "replay_data/cw2_day.labels.csv");
  EXPECT_EQ(LabelsPathFor("/data/skab_valve1_02.csv"), "/data/skab_valve1_02.labels.csv");
  EXPECT_EQ(LabelsPathFor("day.txt"), "day.txt.labels.csv");
  EXPECT_EQ(LabelsPathFor(".csv"), ".csv.labels.csv");
}

}  // namespace
}  // namespace nightjar::replay
