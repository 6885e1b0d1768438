// Runtime: the MQTT daemon's moving parts, wired together. `nightjar run` creates one.
//
// Threads. The bus's network thread runs the message handler and never computes: for a
// sample topic it maps and parses the payload (SampleIntake) and collects the sample for
// the worker owning the channel (ShardRouter: a stable hash of its asset, else its name,
// so an asset's channels share an engine and group their alarms); at the end of the
// bus's batch (MessageBus's batch-end handler: what one network read delivered), before
// a command, and when a worker's share of a batch reaches kMaxBatch, it offers each
// worker its samples in one queue hand-over, never blocking: a full queue drops the
// samples that do not fit, counted per channel and logged rate-limited. A message on the
// command topic is parsed and validated there; messages on the daemon's own output topics
// (a broad subscription can cover them) are ignored; an invalid command is answered at once on
// the reply topic, a valid one goes to the owning worker's queue, which applies it and
// replies. N EngineWorker threads each own an Engine shard (`workers: 1` runs the same
// code). The caller's thread calls Tick() periodically (every 100 ms in nightjar run): it
// publishes the retained status topic every publish_interval_s and after each connect,
// and every checkpoint_interval_s (with a state_dir) queues a checkpoint to every worker.
//
// Topics (see README "Running on MQTT"): alerts and state per channel (engine_worker.h),
// status {"state":"online",...counters} retained, with {"state":"offline",...} as the last
// will and on a clean stop; replies to commands on the reply topic.
//
// Stop(): closes the intake (no handler is mid-way once it returns), lets every worker
// finish what is queued and write its checkpoint, publishes the offline status, then stops the bus
// (which waits a bounded time for unacknowledged publishes). Reload(): hands an already validated
// config to every worker (engine_worker.h says what is kept) and applies a changed
// mqtt.subscriptions at once: a new intake (topic rules, channel templates, payloads)
// replaces the old one between two messages, new filters are subscribed and filters no
// rule uses any more unsubscribed. Every other mqtt: and daemon: key is read at start
// only: a reload that changes one logs one warning naming each such key path, and the
// status carries them in "restart_pending" until a restart (or until they are changed back).
//
// Thread-safety: Create/Start/Tick/Reload/Stop from one owner thread; counters(),
// metrics() and ready() from any thread. Ownership: owns the intake and workers; borrows the bus,
// which must outlive the runtime (Stop() stops it).
#pragma once

#include <atomic>
#include <cstdint>
#include <functional>
#include <memory>
#include <mutex>
#include <string>
#include <string_view>
#include <vector>

#include "config/config.h"
#include "core/status.h"
#include "core/time.h"
#include "mqtt/bad_payload_log.h"
#include "mqtt/message_bus.h"
#include "mqtt/sample_intake.h"
#include "service/engine_worker.h"
#include "service/metrics_text.h"
#include "service/service_options.h"
#include "service/shard.h"
#include "service/state_json.h"

namespace nightjar::service {

class Runtime {
 public:
  using Clock = std::function<core::TimestampUs()>;

  // Compiles the intake rules and builds the workers (not yet started). `bus` must be
  // un-started; its handlers are set here.
  static core::Result<std::unique_ptr<Runtime>> Create(
      ServiceOptions options, std::shared_ptr<const config::LoadedConfig> config,
      mqtt::MessageBus& bus, Clock clock);
  ~Runtime();
  Runtime(const Runtime&) = delete;
  Runtime& operator=(const Runtime&) = delete;

  // Subscribes, starts the workers and the bus (which connects in the background).
  core::Status Start();
  // Publishes the status when due.
  void Tick();
  // Applies a validated config: `next` is BuildServiceOptions() of it.
  void Reload(std::shared_ptr<const config::LoadedConfig> config, const ServiceOptions& next);
  // Counts a reload refused because the new file was invalid (for the status topic).
  void NoteReloadFailure() { reload_failures_.fetch_add(1, std::memory_order_relaxed); }
  // Idempotent.
  void Stop();

  StatusCounters counters() const;
  // The metrics endpoint's figures, read from atomics (never waits for a worker).
  MetricsSnapshot metrics() const;
  // Connected and every subscription acknowledged at least once.
  bool ready() const;

 private:
  // Most samples collected for one worker before they are offered within a batch.
  static constexpr std::size_t kMaxBatch = 1024;

  Runtime(ServiceOptions options, mqtt::MessageBus& bus, Clock clock);
  void OnMessage(std::string_view topic, std::string_view payload);
  void OnSample(std::string_view channel, core::TimestampUs time, double value);
  // Offers every worker the samples collected for it; handler_mutex_ held.
  void FlushSamples();
  // Offers worker `shard` its collected samples and counts the drops; handler_mutex_ held.
  void FlushShard(std::size_t shard);
  void OnCommand(std::string_view payload);
  // Whether `topic` is one the daemon publishes (status, replies, alerts, state).
  bool IsOwnTopic(std::string_view topic) const;
  void PublishStatus(std::string_view state, std::string_view reason);
  core::Result<std::unique_ptr<mqtt::SampleIntake>> MakeIntake(const mqtt::IntakeOptions& options);
  void ApplySubscriptions(const mqtt::IntakeOptions& intake_options);

  const ServiceOptions options_;
  mqtt::MessageBus& bus_;
  const Clock clock_;
  const core::TimestampUs started_at_;
  // Replaced by a reload with both handler_mutex_ and intake_mutex_ held; read by OnMessage
  // under handler_mutex_ and by counters()/metrics() under intake_mutex_.
  std::unique_ptr<mqtt::SampleIntake> intake_;
  std::vector<std::unique_ptr<EngineWorker>> workers_;
  std::atomic<std::size_t> filter_count_{0};
  std::vector<std::pair<std::string, int>> filters_;  // owner thread: the sample filters

  std::mutex handler_mutex_;  // held by OnMessage; Stop() takes it to close the intake
  bool accepting_ = false;    // guarded by handler_mutex_
  // Guarded by handler_mutex_: samples of the current batch, by worker, not yet offered.
  std::vector<std::vector<SampleItem>> pending_;
  // Guarded by handler_mutex_: which worker owns each channel (by its asset, shard.h).
  ShardRouter router_{1, {}};

  mutable std::mutex intake_mutex_;
  std::uint64_t retired_bad_payloads_ = 0;  // guarded by intake_mutex_: of replaced intakes
  std::uint64_t retired_unmapped_ = 0;      // guarded by intake_mutex_

  // Owner thread: the config in force, and the one the daemon started with (set at the
  // first reload).
  std::shared_ptr<const config::LoadedConfig> config_;
  std::shared_ptr<const config::LoadedConfig> started_config_;
  mutable std::mutex restart_mutex_;
  std::vector<std::string> restart_pending_;  // guarded by restart_mutex_

  std::mutex drops_mutex_;
  mqtt::BadPayloadLog drops_;  // guarded by drops_mutex_: per-channel drop counts, rate-limited

  std::atomic<bool> status_due_{true};
  std::atomic<bool> stopping_{false};  // a lost connection is then the clean disconnect
  std::atomic<std::uint64_t> received_{0};
  std::atomic<std::uint64_t> dropped_{0};
  std::atomic<std::uint64_t> commands_{0};
  std::atomic<std::uint64_t> reloads_{0};
  std::atomic<std::uint64_t> reload_failures_{0};
  core::TimestampUs next_status_ = 0;      // owner thread
  core::TimestampUs next_checkpoint_ = 0;  // owner thread; 0 until the first Tick
  bool started_ = false;
  bool stopped_ = false;
};

}  // namespace nightjar::service
