// ResidualCache: one replay of a recording, keeping what threshold tuning needs to re-run
// the anomaly charts without the model.
//
// BuildResidualCache replays the recording once (RunReplay) with a core::ResidualTap
// attached and keeps, per channel, every charted sample: its time, the scaled residual
// the channel gave ResidualMonitor::Observe, the flatline flag and the learning-phase
// milestones (tail window, arming and the sample period it armed with). It also keeps
// the channel's resolved options, the base run's anomaly raise times per channel and
// every raise that no threshold setting changes (sensor alarms), so scores can be
// recomputed for any setting. A channel that is already armed once on_engine_ready has run
// (its checkpoint was loaded) is marked armed_at_start. See threshold_sweep.h for how it
// is re-evaluated.
// Memory: 25 bytes per charted sample (a day of five 1 Hz channels: about 11 MB).
// Thread-safety: building is reentrant; a built cache is read-only and may be shared by
// sweep threads. Ownership: plain values.
#pragma once

#include <cstddef>
#include <cstdint>
#include <string>
#include <vector>

#include "core/engine_options.h"
#include "core/status.h"
#include "core/time.h"
#include "replay/event_scoring.h"
#include "replay/replay_runner.h"

namespace nightjar::replay {

// Bits of ChannelResidualCache::flags.
inline constexpr std::uint8_t kCachedFlatline = 1;
inline constexpr std::uint8_t kCachedTailWindow = 2;    // StartTailWindow after this sample
inline constexpr std::uint8_t kCachedArmed = 4;         // Arm after this sample
inline constexpr std::uint8_t kCachedAlarmHeld = 8;     // armed, alarm not updated (resume hold)
inline constexpr std::uint8_t kCachedChartsReset = 16;  // charts zeroed after this sample

struct ChannelResidualCache {
  std::string name;
  core::ChannelOptions options;  // as resolved for the channel in the base run
  std::vector<core::TimestampUs> times;
  std::vector<double> residuals;
  std::vector<std::uint8_t> flags;
  // The level chart's ratio per sample (ResidualTapPoint::level_ratio): the alarm follows
  // the larger of it and the residual charts' ratio.
  std::vector<double> level_ratios;
  double armed_period_s = 0.0;  // 0 if the channel never armed
  // Channels of its asset in the recording, itself included (core::Engine::asset_channels).
  std::size_t asset_channels = 1;
  // Armed before its first sample: loaded from a checkpoint (ReplayOptions::on_engine_ready,
  // e.g. `tune --state-in`); armed_period_s is then the loaded sample period.
  bool armed_at_start = false;
  // Anomaly raises of the base run, in time order.
  std::vector<core::TimestampUs> base_anomaly_raises;
  // The channel re-learnt at a new operating point during the run (ResumeOptions); the
  // sweep does not re-run that and keeps such a channel at its configured setting.
  bool relearned = false;
};

struct ResidualCache {
  std::string input;
  std::vector<ChannelResidualCache> channels;  // in column order
  // Raises that do not depend on the anomaly thresholds (sensor alarms), in time order.
  // Not part of the tuning objective: detection scores count anomaly alarms only.
  std::vector<Raise> fixed_raises;
  double duration_s = 0.0;  // ReplaySummary::duration_s()
  ReplaySummary summary;    // of the base run
};

// Replays `path` once with `options` (its residual_tap is ignored; the cache sets its
// own). Fails as RunReplay does, naming file, line and column.
core::Result<ResidualCache> BuildResidualCache(const std::string& path,
                                               const ReplayOptions& options);

}  // namespace nightjar::replay
