// DTW, LB_Keogh and z-normalisation against ../shared/references/dtw_vectors.json
// (references.md §4: Müller's worked example via copy; banded pairs, envelopes and a
// 300-pair random sweep computed by dtw_ref.py with a brute-force cross-check).
#include "core/dtw.h"

#include <gtest/gtest.h>

#include <cmath>
#include <limits>
#include <vector>

#include "support/reference_data.h"

namespace nightjar::core {
namespace {

using nightjar::testing::LoadReference;
using nightjar::testing::ToVector;

constexpr double kInf = std::numeric_limits<double>::infinity();

double Distance(const std::vector<double>& a, const std::vector<double>& b, DtwCost cost,
                int band) {
  std::vector<double> rows(2 * b.size());
  return DtwDistance(a, b, cost, band, rows, kInf);
}

TEST(DtwTest, MuellerWorkedExample) {
  // Müller, Fundamentals of Music Processing §3.2 (via copy): X = [1,3,9,2,1],
  // Y = [2,0,0,8,7,2], cost |x - y|: DTW = 9 and the full accumulated-cost matrix.
  const nlohmann::json ref = LoadReference("dtw_vectors.json")["mueller_fmp_example"];
  const std::vector<double> x = ToVector(ref["x"]);
  const std::vector<double> y = ToVector(ref["y"]);
  const std::vector<double> expected = ToVector(ref["accumulated"]);
  const std::vector<double> got = DtwAccumulated(x, y, DtwCost::kAbsolute, -1);
  ASSERT_EQ(got.size(), expected.size());
  for (std::size_t i = 0; i < got.size(); ++i) EXPECT_DOUBLE_EQ(got[i], expected[i]) << i;
  EXPECT_DOUBLE_EQ(Distance(x, y, DtwCost::kAbsolute, -1), ref["dtw"].get<double>());
}

TEST(DtwTest, BandedPairAndLowerBound) {
  // references.md §4 banded pair: r = 0 gives the Euclidean 13 (squared), r >= 1 gives 5;
  // LB_Keogh squared 13 / 3 / 2 / 2.
  const nlohmann::json ref = LoadReference("dtw_vectors.json")["pair2"];
  const std::vector<double> q = ToVector(ref["q"]);
  const std::vector<double> c = ToVector(ref["c"]);
  for (const auto& row : ref["by_band"]) {
    const int r = row["r"].get<int>();
    EXPECT_NEAR(Distance(q, c, DtwCost::kSquared, r), row["dtw"].get<double>(), 1e-12) << r;
    std::vector<double> upper(q.size()), lower(q.size());
    KeoghEnvelope(q, r, upper, lower);
    EXPECT_NEAR(LbKeogh(c, upper, lower), row["lb_keogh"].get<double>(), 1e-12) << r;
  }
}

TEST(DtwTest, ShiftedBumpEnvelopeAndDistances) {
  const nlohmann::json ref = LoadReference("dtw_vectors.json")["shifted_bump"];
  const std::vector<double> q = ToVector(ref["q"]);
  const std::vector<double> c = ToVector(ref["c"]);
  std::vector<double> upper(q.size()), lower(q.size());
  KeoghEnvelope(q, 1, upper, lower);
  EXPECT_EQ(upper, ToVector(ref["envelope_r1"]["upper"]));
  EXPECT_EQ(lower, ToVector(ref["envelope_r1"]["lower"]));
  for (const auto& row : ref["by_band"]) {
    const int r = row["r"].get<int>();
    EXPECT_NEAR(Distance(q, c, DtwCost::kSquared, r), row["dtw"].get<double>(), 1e-12) << r;
  }
}

TEST(DtwTest, RandomSweepExamples) {
  // dtw_ref.py random sweep (z-normalised random walks): DTW_r and LB_Keogh_r per band.
  const nlohmann::json ref = LoadReference("dtw_vectors.json")["random_sweep"];
  ASSERT_FALSE(ref["examples"].empty());
  for (const auto& example : ref["examples"]) {
    const std::vector<double> q = ToVector(example["q_znorm"]);
    const std::vector<double> c = ToVector(example["c_znorm"]);
    EXPECT_NEAR(Distance(q, c, DtwCost::kSquared, 0), example["euclidean"].get<double>(), 1e-9);
    const std::vector<double> dtw = ToVector(example["dtw_r"]);
    const std::vector<double> lb = ToVector(example["lb_keogh_r"]);
    for (std::size_t r = 0; r < dtw.size(); ++r) {
      EXPECT_NEAR(Distance(q, c, DtwCost::kSquared, static_cast<int>(r)), dtw[r], 1e-9) << r;
      std::vector<double> upper(q.size()), lower(q.size());
      KeoghEnvelope(q, static_cast<int>(r), upper, lower);
      EXPECT_NEAR(LbKeogh(c, upper, lower), lb[r], 1e-9) << r;
      EXPECT_LE(LbKeogh(c, upper, lower), dtw[r] + 1e-12) << "lower bound, r " << r;
    }
  }
}

TEST(DtwTest, ZNormalisedDistanceIdentity) {
  // Rakthanmanon et al. 2012 (from memory), checked in references.md §4 against numpy:
  // ED(z(a), z(b))^2 = 2 m (1 - pearson(a, b)).
  const nlohmann::json ref = LoadReference("dtw_vectors.json")["znorm_ed"]["example"];
  const std::vector<double> a = ToVector(ref["a"]);
  const std::vector<double> b = ToVector(ref["b"]);
  std::vector<double> za(a.size()), zb(b.size());
  ASSERT_TRUE(ZNormalize(a, za, 0.0));
  ASSERT_TRUE(ZNormalize(b, zb, 0.0));
  const double distance = Distance(za, zb, DtwCost::kSquared, 0);
  EXPECT_NEAR(distance, ref["znorm_ed"].get<double>(), 1e-9);
  const double m = ref["m"].get<double>();
  EXPECT_NEAR(distance * distance, 2 * m * (1 - ref["pearson_r"].get<double>()), 1e-9);
}

TEST(DtwTest, ConstantWindowIsNotNormalised) {
  // A constant window has no shape (references.md §4: flag it rather than divide).
  std::vector<double> flat(10, 3.0), out(10, -1.0);
  EXPECT_FALSE(ZNormalize(flat, out, 0.0));
  EXPECT_EQ(out[0], -1.0);
}

TEST(DtwTest, EarlyAbandonAndImpossibleBand) {
  const std::vector<double> a = {0, 0, 0, 0, 0};
  const std::vector<double> b = {5, 5, 5, 5, 5};
  std::vector<double> rows(10);
  EXPECT_EQ(DtwDistance(a, b, DtwCost::kSquared, 1, rows, 10.0), kInf);  // 125 > 10
  EXPECT_NEAR(DtwDistance(a, b, DtwCost::kSquared, 1, rows, kInf), std::sqrt(125.0), 1e-12);
  const std::vector<double> shorter = {5, 5};
  std::vector<double> rows2(4);
  EXPECT_EQ(DtwDistance(a, shorter, DtwCost::kSquared, 1, rows2, kInf), kInf);
}

}  // namespace
}  // namespace nightjar::core
