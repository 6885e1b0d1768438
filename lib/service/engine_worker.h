// EngineWorker: one engine thread owning a shard of the channels.
//
// The network thread offers samples in batches (OfferBatch; never blocking: a full queue
// refuses them and the caller counts the drop) and hands over control items (operator commands,
// config reloads) that always get through. The hole a drop leaves in a channel's stream is
// nightjar's fault, not the sensor's: the first drop of a hole queues a marker behind the
// channel's last accepted sample (one per channel until one of its samples is accepted
// again, so at most one per channel), and the worker, reaching it, tells the engine
// (core::Discontinuity::kDropped): no gap alarm for that hole. Holes are counted
// (counters().holes) and logged at a limited rate. The worker thread takes everything queued at
// once, applies control items first, runs the samples through its core::Engine, and publishes:
//   alerts    on <alert_prefix>/<channel as topic>, QoS from the config, not retained;
//   state     retained on <state_prefix>/<channel as topic>, at once when the channel's
//             state (learning/armed/in_alarm/stale) changes, otherwise at most every
//             publish_interval_s while its values change;
//   replies   to commands on the reply topic.
// About every 100 ms, also when idle, it moves the engine's clock to the wall clock
// (gap alarms for silent channels, state "stale") and publishes state that is due.
//
// The engine's time base is sample time, which may run behind the wall clock (a gateway
// replaying a buffer, a clock offset). So the worker's "now" is the newest sample time
// plus the wall-clock time elapsed since that sample arrived (the wall clock until the
// first sample): silence is measured as it is felt, whatever the time base. Gap sweeps
// and operator commands use it; a shelve lasts duration_s from then.
//
// Reload: each existing channel whose resolved options are unchanged keeps its pipeline
// and what it learnt; a channel whose options changed starts learning again with the new
// ones: each of its active alarms is cleared first, on the alert topic, with a message
// saying the channel was reset by a config reload (a dashboard must not keep a raise the
// new pipeline knows nothing of), and its state goes back to learning. New channels get
// the new config.
//
// Stop: StopAndJoin() lets the thread finish everything already queued, publish the
// latest state of every channel that changed since its last state message, checkpoint
// every channel (when a state folder is set), then joins it.
//
// State (worker_state.h): before its first sample the thread loads the checkpoints of its
// own channels; a CheckpointItem (queued by the runtime every checkpoint_interval_s)
// writes those that changed since their last checkpoint (a sample, an alert, a command or
// a reload reset touched them; a channel loaded from another folder than the state folder
// counts as changed), and so does the stop. Files are written on this thread, never the network
// thread: the network thread only TryPush()es, so a slow disk can fill this worker's queue (samples
// beyond its capacity are dropped and counted, as under any overload) but never blocks
// intake; and since only this thread touches its channels, a checkpoint sits between two
// samples, never inside one. A channel loaded from a file publishes its state at its first
// sample; one reset by a reload is written fresh at the next checkpoint.
//
// Thread-safety: OfferBatch from one thread at a time (the network thread: the
// runtime calls it under its handler lock); PushControl and counters() from any thread; Start and
// StopAndJoin from the owner's thread. The engine and per-channel bookkeeping are touched
// by the worker thread only. Ownership: owns its engine, queue and thread; borrows the bus,
// which must outlive StopAndJoin().
#pragma once

#include <atomic>
#include <chrono>
#include <cstddef>
#include <cstdint>
#include <functional>
#include <memory>
#include <optional>
#include <string>
#include <thread>
#include <unordered_set>
#include <utility>
#include <variant>
#include <vector>

#include "config/config.h"
#include "core/engine.h"
#include "core/time.h"
#include "mqtt/message_bus.h"
#include "service/operator_command.h"
#include "service/service_metrics.h"
#include "service/work_queue.h"
#include "service/worker_state.h"

namespace nightjar::service {

struct SampleItem {
  std::string channel;
  core::TimestampUs time = 0;
  double value = 0.0;
  std::chrono::steady_clock::time_point arrived{};  // at the network thread, for latency
  // Not a sample but a hole marker: samples of `channel` were dropped here (OfferBatch).
  bool hole = false;
};
struct CommandItem {
  ParsedCommand parsed;  // status OK
};
struct ReloadItem {
  std::shared_ptr<const config::LoadedConfig> config;
};
struct CheckpointItem {};
struct StopItem {};
using ControlItem = std::variant<CommandItem, ReloadItem, CheckpointItem, StopItem>;

struct WorkerTopics {
  std::string alert_prefix;
  std::string state_prefix;
  std::string reply_topic;
  int qos = 1;
  double publish_interval_s = 5.0;
};

struct WorkerCounters {
  std::uint64_t samples = 0;         // samples run through the engine
  std::uint64_t rejected = 0;        // samples for channels that could not be created
  std::uint64_t alerts = 0;          // alerts published
  std::uint64_t channels = 0;        // channels in the engine
  std::uint64_t channels_kept = 0;   // by reloads: channels that kept their state
  std::uint64_t channels_reset = 0;  // by reloads: channels that learn again
  std::uint64_t checkpoints = 0;     // checkpoints written (each covers all channels)
  std::uint64_t holes = 0;           // holes left in channel streams by dropped samples
};

class EngineWorker {
 public:
  using Clock = std::function<core::TimestampUs()>;

  EngineWorker(int index, std::shared_ptr<const config::LoadedConfig> config, WorkerTopics topics,
               std::size_t queue_capacity, mqtt::MessageBus& bus, Clock clock,
               WorkerStateOptions state = {});
  ~EngineWorker();
  EngineWorker(const EngineWorker&) = delete;
  EngineWorker& operator=(const EngineWorker&) = delete;

  void Start();
  // Offers a batch in one queue hand-over (one lock, at most one wake-up): samples from
  // the front are queued while there is room; returns how many. The rest,
  // samples[returned..], are dropped (left unmoved for the caller to count) and, at a
  // hole's first drop, the channel's hole marker is queued.
  std::size_t OfferBatch(std::vector<SampleItem>& samples);
  void PushControl(ControlItem item) { queue_.PushControl(std::move(item)); }
  void StopAndJoin();

  WorkerCounters counters() const;
  // Latency, alerts by kind, channels by state (for the metrics endpoint).
  const WorkerMetrics& metrics() const { return metrics_; }
  std::size_t queued() const { return queue_.size(); }

 private:
  // Per-channel publishing bookkeeping, by ChannelId.
  struct ChannelView {
    bool published = false;
    core::ChannelState state = core::ChannelState::kLearning;
    core::TimestampUs published_at = 0;  // wall clock
    core::TimestampUs last_sample = 0;
    bool dirty = false;    // values changed since the last publish
    bool sampled = false;  // false for a channel loaded from a file until its first sample
    bool counted = false;  // counted_state is in metrics_.channels_by_state
    core::ChannelState counted_state = core::ChannelState::kLearning;
  };

  void Run();
  // The samples of one PopAll, in order.
  void HandleSamples(const std::vector<SampleItem>& samples, core::TimestampUs now);
  // `id`: the channel's id looked up before the batch, or nullopt if it had none then.
  void HandleSample(const SampleItem& sample, std::optional<core::ChannelId> id,
                    core::TimestampUs now);
  void HandleHole(const SampleItem& marker);
  // Grows the per-channel vectors to the engine's channel count; new ones are unsaved
  // unless `saved` (loaded from the state folder itself).
  void TrackChannels(bool saved);
  void HandleCommand(const CommandItem& item, core::TimestampUs now);
  void HandleReload(const ReloadItem& item, core::TimestampUs now);
  void Checkpoint(std::string_view why);
  void PublishAlerts();
  void MaybePublishState(core::ChannelId id, core::TimestampUs now, bool force);
  // Gap check and state that is due; `flush` publishes every changed state (on stop).
  void Sweep(core::TimestampUs now, bool flush);
  core::TimestampUs EngineNow(core::TimestampUs wall) const;

  const int index_;
  const WorkerTopics topics_;
  mqtt::MessageBus& bus_;
  const Clock clock_;
  WorkQueue<SampleItem, ControlItem> queue_;
  std::thread thread_;

  // OfferBatch's thread only: channels with samples dropped since their last accepted one.
  struct NameHash {
    using is_transparent = void;
    std::size_t operator()(std::string_view name) const {
      return std::hash<std::string_view>{}(name);
    }
  };
  std::unordered_set<std::string, NameHash, std::equal_to<>> open_holes_;
  std::vector<std::pair<std::size_t, std::string>> hole_candidates_;  // OfferBatch scratch

  // Worker thread only:
  std::shared_ptr<const config::LoadedConfig> config_;
  core::Engine engine_;
  std::vector<ChannelView> views_;
  std::vector<char> unsaved_;  // by ChannelId: changed since its last checkpoint
  std::vector<core::Alert> alerts_;
  std::vector<std::optional<core::ChannelId>> ids_;  // HandleSamples: by sample
  std::string topic_;
  std::string payload_;
  core::TimestampUs newest_time_ = 0;  // newest sample time seen
  core::TimestampUs newest_wall_ = 0;  // wall clock when it arrived
  bool has_sample_ = false;
  core::TimestampUs last_sweep_ = 0;
  std::uint64_t rejected_logged_ = 0;
  WorkerStateStore state_;

  std::atomic<std::uint64_t> samples_{0};
  std::atomic<std::uint64_t> rejected_{0};
  std::atomic<std::uint64_t> alerts_published_{0};
  std::atomic<std::uint64_t> channels_{0};
  std::atomic<std::uint64_t> kept_{0};
  std::atomic<std::uint64_t> reset_{0};
  std::atomic<std::uint64_t> checkpoints_{0};
  std::atomic<std::uint64_t> holes_{0};
  std::uint64_t holes_logged_ = 0;  // worker thread: holes seen by HandleHole
  WorkerMetrics metrics_;
};

}  // namespace nightjar::service
