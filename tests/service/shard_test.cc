// ShardFor / StableChannelHash: FNV-1a 64 checked against the test vectors published with
// the FNV reference code by Fowler, Noll and Vo (isthe.com/chongo/tech/comp/fnv; values
// quoted from memory and re-computed with a three-line Python FNV-1a before use).
#include "service/shard.h"

#include <gtest/gtest.h>

#include <string>
#include <vector>

namespace nightjar::service {
namespace {

TEST(ShardTest, HashIsFnv1a64) {
  EXPECT_EQ(StableChannelHash(""), 0xcbf29ce484222325ull);
  EXPECT_EQ(StableChannelHash("a"), 0xaf63dc4c8601ec8cull);
  EXPECT_EQ(StableChannelHash("foobar"), 0x85944171f73967e8ull);
}

TEST(ShardTest, OneWorkerTakesEverythingAndShardsStayInRange) {
  EXPECT_EQ(ShardFor("cw2.pump_a.flow", 1), 0u);
  for (std::size_t workers = 2; workers <= 7; ++workers) {
    EXPECT_LT(ShardFor("cw2.pump_a.flow", workers), workers);
    EXPECT_EQ(ShardFor("cw2.pump_a.flow", workers), StableChannelHash("cw2.pump_a.flow") % workers);
  }
}

TEST(ShardTest, SpreadsManyChannelsEvenly) {
  // 4000 plant-like names over 4 workers: a uniform hash puts 1000 +- 3 sd (sd = 27.4,
  // binomial) on each; allow 10 %.
  std::vector<int> counts(4, 0);
  for (int skid = 0; skid < 40; ++skid) {
    for (int tag = 0; tag < 100; ++tag) {
      const std::string name = std::string("cw")
                                   .append(std::to_string(skid))
                                   .append(".tag_")
                                   .append(std::to_string(tag))
                                   .append(".value");
      ++counts[ShardFor(name, 4)];
    }
  }
  for (const int c : counts) {
    EXPECT_GT(c, 900);
    EXPECT_LT(c, 1100);
  }
}

}  // namespace
}  // namespace nightjar::service
