// Engine: nightjar's detection core for many channels.
//
// Takes timestamped samples {channel, time, value} and returns the alerts they cause,
// deterministically: the same options, seed and input give the same alerts, bit for
// bit, on one build. It owns every channel's pipeline and one scratch workspace for
// model training, shared by its channels. No I/O, no clock: time comes with samples.
// Anomaly alarms are grouped per asset (core/alarm_episodes.h): every alert the engine
// appends has its annunciated and episode fields set. A channel's asset is fixed when the
// channel is created (AddChannel, or LoadChannel of a new one), from its `asset` option.
// Thread-safety: none. The daemon runs one Engine per worker thread, each owning a
// shard of channels (all channels of an asset on one); replay runs one on one thread.
// Same code either way.
#pragma once

#include <cstddef>
#include <cstdint>
#include <memory>
#include <optional>
#include <span>
#include <string>
#include <string_view>
#include <unordered_map>
#include <vector>

#include "core/alarm_episodes.h"
#include "core/alert.h"
#include "core/channel_pipeline.h"
#include "core/channel_state.h"
#include "core/engine_options.h"
#include "core/lstm_network.h"
#include "core/residual_tap.h"
#include "core/status.h"
#include "core/threshold_design.h"
#include "core/time.h"

namespace nightjar::core {

struct Sample {
  std::string_view channel;
  TimestampUs time = 0;
  double value = 0.0;
};

using ChannelId = std::uint32_t;

class Engine {
 public:
  explicit Engine(EngineOptions options, ChannelOptionsResolver resolver = {});
  ~Engine();
  Engine(const Engine&) = delete;
  Engine& operator=(const Engine&) = delete;

  // Creates a channel with options from the resolver (or the defaults). Fails if the
  // name is empty, taken, or its options are invalid (message names the key).
  Result<ChannelId> AddChannel(std::string_view name);
  Result<ChannelId> AddChannel(std::string_view name, const ChannelOptions& options);
  std::optional<ChannelId> FindChannel(std::string_view name) const;

  // Processes one sample, creating its channel on first sight; appends alerts to `out`.
  // A sample for a channel that cannot be created is counted in rejected_samples().
  void Process(const Sample& sample, std::vector<Alert>& out);
  void Process(ChannelId channel, TimestampUs time, double value, std::vector<Alert>& out);

  // Moves the engine's clock to `now` and raises gap alarms of silent channels. Called
  // by the daemon every tick; Process() calls it when sample time moves on by a second.
  void AdvanceClock(TimestampUs now, std::vector<Alert>& out);

  // The hole before `channel`'s next sample is nightjar's own, not the sensor's: no gap
  // alarm for it (ChannelPipeline::NoteDiscontinuity says exactly what happens). The
  // daemon calls it for samples dropped at a full queue; LoadChannel calls it itself
  // with kRestart. An unknown id is ignored.
  void NoteDiscontinuity(ChannelId channel, Discontinuity reason);

  // The input so far was a known-good recording (`nightjar learn`): every channel arms
  // if its residual scale has settled and forgets the alarms it raised
  // (ChannelPipeline::ConcludeKnownGood). Returns how many channels are armed.
  std::size_t ConcludeKnownGood();

  // For a config reload: channels created from now on get `options` and `resolver`;
  // existing channels keep their pipelines (and what they learnt) until ResetChannel().
  void Reconfigure(EngineOptions options, ChannelOptionsResolver resolver);
  // Replaces the channel's pipeline by a new one with `options` (seeded as AddChannel
  // would): it learns again from scratch. InvalidArgument naming the key when `options`
  // are invalid; the channel is unchanged then.
  Status ResetChannel(ChannelId channel, const ChannelOptions& options);
  // The same, and first appends to `out` a clear dated `now` for every alarm of the channel
  // that is active (its raise is out; the new pipeline knows nothing of it), whose message
  // ends with `why` (e.g. "channel reset by a config reload"), so no subscriber keeps a
  // stale raise. Nothing is appended when `options` are invalid.
  Status ResetChannel(ChannelId channel, const ChannelOptions& options, TimestampUs now,
                      std::string_view why, std::vector<Alert>& out);
  // The options the channel was created with.
  const ChannelOptions& channel_options(ChannelId id) const { return options_of_[id]; }

  // ISA-18.2 operator actions on one alarm of one channel. Shelving an anomaly alarm
  // that is in alarm takes it out of its asset's episode (AlarmEpisodes::NoteSilenced).
  Status Acknowledge(std::string_view channel, AlarmCondition condition, TimestampUs now);
  Status Shelve(std::string_view channel, AlarmCondition condition, TimestampUs now,
                TimestampUs until);
  Status Unshelve(std::string_view channel, AlarmCondition condition, TimestampUs now,
                  std::vector<Alert>& out);

  // Checkpoints (core/channel_state.h). SaveChannel appends channel `id`'s state to
  // `out`. LoadChannel restores channel `name` from a checkpoint under the options the
  // resolver gives now: creates the channel if it does not exist, else replaces its
  // state. On failure (*problem says why) the engine is unchanged: the channel, if it
  // exists, keeps its state, and a new one starts fresh on its first sample. A restored
  // channel's next sample follows nightjar's own downtime (NoteDiscontinuity kRestart):
  // however late it comes it raises no gap alarm, and a hole longer than the gap limit
  // restarts the sequence as after a gap; a sample that follows on at once continues bit
  // for bit.
  void SaveChannel(ChannelId id, std::vector<std::uint8_t>& out) const;
  Status LoadChannel(std::string_view name, std::span<const std::uint8_t> bytes,
                     StateProblem* problem = nullptr);
  // Every channel, present and future, reports its charted residuals to `tap` (nullptr:
  // none). Borrowed: it must outlive the engine or be unset first.
  void set_residual_tap(ResidualTap* tap);

  std::size_t channel_count() const { return channels_.size(); }
  const std::string& channel_name(ChannelId id) const { return channels_[id]->name(); }
  ChannelStatus channel_status(ChannelId id) const { return channels_[id]->status(); }
  const ChannelPipeline& channel(ChannelId id) const { return *channels_[id]; }
  // The channel's asset (AssetOfChannel); empty when it is grouped with no other.
  const std::string& channel_asset(ChannelId id) const { return asset_of_[id]; }
  // Channels of `id`'s asset, itself included (1 when grouped with no other): its
  // false-alarm budgets are shared among them (ChannelOptions::asset_shares_budget).
  std::size_t asset_channels(ChannelId id) const;
  const AlarmEpisodes& episodes() const { return episodes_; }
  std::int64_t rejected_samples() const { return rejected_samples_; }

 private:
  struct NameHash {
    using is_transparent = void;
    std::size_t operator()(std::string_view name) const {
      return std::hash<std::string_view>{}(name);
    }
  };
  Result<ChannelPipeline*> Find(std::string_view name);
  void EnsureWorkspace(const ChannelOptions& options);
  // `channel` re-learnt at the level check of a resume: its asset's other channels that
  // resumed with it re-learn too (ChannelPipeline::RelearnWithAsset).
  void RelearnAssetWith(ChannelId channel, TimestampUs now, std::vector<Alert>& out);
  // Fills the grouping fields of out[from...] (AlarmEpisodes::Annotate).
  void Group(std::vector<Alert>& out, std::size_t from);
  // After `id`'s pipeline was replaced by a restored one: its episode membership follows
  // the restored anomaly alarm.
  void RegroupRestored(ChannelId id);
  // Context inputs (ContextOptions): FixContext picks `channel`'s context channels when its
  // model starts; ResolveContext maps the names its pipeline holds to ids (kUnresolved for
  // one not seen yet); GatherContext gives what they show now, valid until the next call.
  void FixContext(ChannelId channel);
  void ResolveContext(ChannelId channel);
  std::span<const ContextSource> GatherContext(ChannelId channel);
  // Files the channel just appended to asset_of_ under its asset's channel count.
  void JoinAsset(ChannelId id);

  EngineOptions options_;
  ChannelOptionsResolver resolver_;
  ThresholdDesigner designer_;
  std::vector<std::unique_ptr<ChannelPipeline>> channels_;
  std::vector<ChannelOptions> options_of_;  // by ChannelId
  std::vector<std::string> asset_of_;       // by ChannelId
  // Channel counts of the assets (by slot) and each channel's slot (kNoAsset if ungrouped).
  static constexpr std::size_t kNoAsset = static_cast<std::size_t>(-1);
  std::vector<std::size_t> asset_sizes_;
  std::vector<std::size_t> asset_slot_;  // by ChannelId
  std::unordered_map<std::string, std::size_t, NameHash, std::equal_to<>> asset_slots_;
  // Each channel's context channels by id, in its pipeline's context_names() order.
  static constexpr ChannelId kUnresolved = static_cast<ChannelId>(-1);
  std::vector<std::vector<ChannelId>> context_of_;  // by ChannelId
  std::vector<ContextSource> context_values_;       // GatherContext's scratch
  AlarmEpisodes episodes_;
  std::unordered_map<std::string, ChannelId, NameHash, std::equal_to<>> ids_;
  std::unique_ptr<LstmWorkspace<float>> workspace_;
  int workspace_inputs_ = 0;
  int workspace_hidden_ = 0;
  int workspace_window_ = 0;
  bool clock_started_ = false;
  TimestampUs clock_ = 0;
  std::int64_t rejected_samples_ = 0;
  ResidualTap* tap_ = nullptr;
};

// Deterministic 64-bit seed for a channel from the engine seed and the channel name.
std::uint64_t ChannelSeed(std::uint64_t engine_seed, std::string_view channel);

}  // namespace nightjar::core
