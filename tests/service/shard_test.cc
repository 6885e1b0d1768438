// ShardFor / StableChannelHash: FNV-1a 64 checked against the test vectors published with
// the FNV reference code by Fowler, Noll and Vo (isthe.com/chongo/tech/comp/fnv; values
// quoted from memory and re-computed with a three-line Python FNV-1a before use).
#include "service/shard.h"

#include <gtest/gtest.h>

#include <string>
#include <string_view>
#include <vector>

#include "core/engine_options.h"

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

TEST(ShardTest, AnAssetsChannelsShareOneWorker) {
  // By the default asset (the name before its last dot) every channel of 50 pumps lands
  // on its pump's worker; the pumps still spread over all four workers.
  ShardRouter router(4, {});
  std::vector<int> pumps_per_worker(4, 0);
  for (int pump = 0; pump < 50; ++pump) {
    const std::string asset = "cw2.pump_" + std::to_string(pump);
    const std::size_t worker = router.WorkerFor(asset + ".flow");
    EXPECT_EQ(worker, ShardFor(asset, 4));
    for (const char* signal : {".pressure", ".motor_current", ".bearing_temperature"}) {
      EXPECT_EQ(router.WorkerFor(asset + signal), worker) << asset << signal;
    }
    ++pumps_per_worker[worker];
  }
  for (const int n : pumps_per_worker) EXPECT_GT(n, 0);
}

TEST(ShardTest, ARouterFollowsTheConfiguredAssetAndRemembersItsChoice) {
  const auto rig_or_none = [](std::string_view channel) {
    core::ChannelOptions options;
    options.asset = channel.starts_with("Acc") ? "rig" : "none";
    return options;
  };
  ShardRouter router(3, rig_or_none);
  EXPECT_EQ(router.WorkerFor("Accelerometer1RMS"), ShardFor("rig", 3));
  EXPECT_EQ(router.WorkerFor("Accelerometer2RMS"), ShardFor("rig", 3));
  EXPECT_EQ(router.WorkerFor("cw2.pump_a.flow"), ShardFor("cw2.pump_a.flow", 3));  // "none"
  // A reload that changes the assets moves only channels not seen yet.
  router.set_resolver([](std::string_view) { return core::ChannelOptions{}; });
  EXPECT_EQ(router.WorkerFor("Accelerometer1RMS"), ShardFor("rig", 3));
  EXPECT_EQ(router.WorkerFor("cw2.pump_b.flow"), ShardFor("cw2.pump_b", 3));
  EXPECT_EQ(ShardRouter(1, rig_or_none).WorkerFor("Accelerometer1RMS"), 0u);
}

}  // namespace
}  // namespace nightjar::service
