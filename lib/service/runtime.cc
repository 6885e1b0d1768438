#include "service/runtime.h"

#include <spdlog/spdlog.h>

#include <algorithm>
#include <chrono>

#include "service/shard.h"

namespace nightjar::service {

core::Result<std::unique_ptr<Runtime>> Runtime::Create(
    ServiceOptions options, std::shared_ptr<const config::LoadedConfig> config,
    mqtt::MessageBus& bus, Clock clock) {
  if (options.workers < 1) return core::Status::InvalidArgument("daemon.workers: must be >= 1");
  std::unique_ptr<Runtime> runtime(new Runtime(std::move(options), bus, std::move(clock)));
  Runtime* self = runtime.get();
  core::Result<std::unique_ptr<mqtt::SampleIntake>> intake =
      self->MakeIntake(self->options_.intake);
  if (!intake.ok()) return intake.status();
  runtime->intake_ = std::move(intake).value();
  runtime->config_ = config;
  runtime->filters_ = runtime->intake_->Filters();
  const WorkerTopics topics{self->options_.alert_prefix, self->options_.state_prefix,
                            self->options_.reply_topic, self->options_.qos,
                            self->options_.publish_interval_s};
  const WorkerStateOptions state{
      self->options_.state_in.empty() ? self->options_.state_dir : self->options_.state_in,
      self->options_.state_dir, self->options_.workers, config->Resolver()};
  for (int i = 0; i < self->options_.workers; ++i) {
    runtime->workers_.push_back(std::make_unique<EngineWorker>(
        i, config, topics, self->options_.queue_capacity, bus, self->clock_, state));
  }
  runtime->pending_.resize(runtime->workers_.size());
  runtime->router_ = ShardRouter(runtime->workers_.size(), config->Resolver());
  bus.SetMessageHandler([self](std::string_view topic, std::string_view payload) {
    self->OnMessage(topic, payload);
  });
  bus.SetBatchEndHandler([self] {
    const std::lock_guard lock(self->handler_mutex_);
    if (self->accepting_) self->FlushSamples();
  });
  bus.SetConnectionHandler([self](bool connected) {
    if (connected) {
      spdlog::info("connected to broker {}:{}", self->options_.client.host,
                   self->options_.client.port);
      self->status_due_.store(true);
    } else if (self->stopping_.load()) {
      spdlog::info("disconnected from broker {}:{}", self->options_.client.host,
                   self->options_.client.port);
    } else {
      spdlog::warn("connection to broker {}:{} lost; reconnecting", self->options_.client.host,
                   self->options_.client.port);
    }
  });
  return runtime;
}

core::Result<std::unique_ptr<mqtt::SampleIntake>> Runtime::MakeIntake(
    const mqtt::IntakeOptions& options) {
  return mqtt::SampleIntake::Create(
      options, clock_,
      [this](std::string_view channel, core::TimestampUs time, double value) {
        OnSample(channel, time, value);
      },
      [](std::string_view, const core::Status& problem, std::uint64_t suppressed) {
        if (suppressed > 0) {
          spdlog::warn("{} ({} more like it since the last report)", problem.message(), suppressed);
        } else {
          spdlog::warn("{}", problem.message());
        }
      });
}

Runtime::Runtime(ServiceOptions options, mqtt::MessageBus& bus, Clock clock)
    : options_(std::move(options)),
      bus_(bus),
      clock_(std::move(clock)),
      started_at_(clock_()),
      drops_(mqtt::BadPayloadLogOptions{60.0, 4096}) {}

Runtime::~Runtime() { Stop(); }

core::Status Runtime::Start() {
  if (started_) return core::Status::FailedPrecondition("runtime already started");
  started_ = true;
  for (const auto& [filter, qos] : filters_) {
    if (core::Status s = bus_.Subscribe(filter, qos); !s.ok()) return s;
  }
  if (core::Status s = bus_.Subscribe(options_.command_topic, 1); !s.ok()) return s;
  filter_count_.store(filters_.size() + 1);
  // spdlog's registry is built on first use; build it here, before the workers log, so
  // no two threads race to create it (TSan cannot see the guard inside libspdlog.so).
  spdlog::default_logger_raw();
  for (auto& worker : workers_) worker->Start();
  {
    const std::lock_guard lock(handler_mutex_);
    accepting_ = true;
  }
  return bus_.Start();
}

void Runtime::OnMessage(std::string_view topic, std::string_view payload) {
  const std::lock_guard lock(handler_mutex_);
  if (!accepting_) return;
  if (topic == options_.command_topic) {
    OnCommand(payload);
    return;
  }
  if (IsOwnTopic(topic)) return;  // a broad subscription must not feed our output back in
  intake_->OnMessage(topic, payload);
}

bool Runtime::IsOwnTopic(std::string_view topic) const {
  const auto under = [topic](std::string_view prefix) {
    return topic.size() > prefix.size() && topic.substr(0, prefix.size()) == prefix &&
           topic[prefix.size()] == '/';
  };
  return topic == options_.status_topic || topic == options_.reply_topic ||
         under(options_.alert_prefix) || under(options_.state_prefix);
}

void Runtime::OnSample(std::string_view channel, core::TimestampUs time, double value) {
  received_.fetch_add(1, std::memory_order_relaxed);
  const std::size_t shard = router_.WorkerFor(channel);
  std::vector<SampleItem>& batch = pending_[shard];
  batch.push_back(
      SampleItem{std::string(channel), time, value, std::chrono::steady_clock::now(), false});
  if (batch.size() >= kMaxBatch) FlushShard(shard);
}

void Runtime::FlushSamples() {
  for (std::size_t shard = 0; shard < pending_.size(); ++shard) {
    if (!pending_[shard].empty()) FlushShard(shard);
  }
}

void Runtime::FlushShard(std::size_t shard) {
  std::vector<SampleItem>& batch = pending_[shard];
  const std::size_t taken = workers_[shard]->OfferBatch(batch);
  if (taken < batch.size()) {
    dropped_.fetch_add(batch.size() - taken, std::memory_order_relaxed);
    const core::TimestampUs now = clock_();
    for (std::size_t i = taken; i < batch.size(); ++i) {
      const std::string& channel = batch[i].channel;
      mqtt::BadPayloadLog::Decision d;
      {
        const std::lock_guard lock(drops_mutex_);
        d = drops_.Record(channel, now);
      }
      if (d.log_now) {
        spdlog::warn(
            "worker queue full: dropped a sample of {} ({} dropped on it so far, {} since "
            "the last report)",
            channel, d.total, d.suppressed + 1);
      }
    }
  }
  batch.clear();
}

void Runtime::OnCommand(std::string_view payload) {
  FlushSamples();  // samples that came before the command are not held back behind it
  commands_.fetch_add(1, std::memory_order_relaxed);
  ParsedCommand parsed = ParseOperatorCommand(payload);
  if (!parsed.status.ok()) {
    spdlog::warn("topic {}: command refused: {}", options_.command_topic, parsed.status.message());
    const core::Status s = bus_.Publish(
        options_.reply_topic, CommandReplyJson(parsed, core::Status::Ok()), options_.qos, false);
    if (!s.ok()) spdlog::warn("reply not published: {}", s.message());
    return;
  }
  const std::size_t shard = router_.WorkerFor(parsed.command.channel);
  workers_[shard]->PushControl(CommandItem{std::move(parsed)});
}

void Runtime::Tick() {
  if (stopped_) return;
  const core::TimestampUs now = clock_();
  if (status_due_.exchange(false) || now >= next_status_) {
    PublishStatus("online", "");
    next_status_ = now + static_cast<core::TimestampUs>(options_.publish_interval_s * 1e6);
  }
  // A control item, so each worker writes between two samples (engine_worker.h).
  if (!options_.state_dir.empty() && now >= next_checkpoint_) {
    if (next_checkpoint_ != 0) {
      for (auto& worker : workers_) worker->PushControl(CheckpointItem{});
    }
    next_checkpoint_ = now + static_cast<core::TimestampUs>(options_.checkpoint_interval_s * 1e6);
  }
}

void Runtime::Reload(std::shared_ptr<const config::LoadedConfig> config,
                     const ServiceOptions& next) {
  const std::vector<std::string> changed =
      config::ChangedServiceKeys(config_->service, config->service);
  // The workers get the new channel options before any sample of a new topic can reach
  // them (control items go ahead of samples).
  for (auto& worker : workers_) worker->PushControl(ReloadItem{config});
  {
    const std::lock_guard lock(handler_mutex_);
    router_.set_resolver(config->Resolver());
  }
  if (std::find(changed.begin(), changed.end(), "mqtt.subscriptions") != changed.end()) {
    ApplySubscriptions(next.intake);
  }
  // Everything else in mqtt: and daemon: is read once at start (connection, topics the
  // workers were built with, sizes): compared with the config the daemon started with, so
  // a change that was undone is no longer pending.
  std::vector<std::string> pending = config::ChangedServiceKeys(
      started_config_ ? started_config_->service : config_->service, config->service);
  std::erase(pending, "mqtt.subscriptions");
  if (!pending.empty()) {
    std::string keys;
    for (const std::string& key : pending) keys.append(keys.empty() ? "" : ", ").append(key);
    spdlog::warn("reload: mqtt: or daemon: changed; these keys apply at the next start only: {}",
                 keys);
  }
  {
    const std::lock_guard lock(restart_mutex_);
    restart_pending_ = std::move(pending);
  }
  if (!started_config_) started_config_ = config_;
  config_ = config;
  reloads_.fetch_add(1, std::memory_order_relaxed);
  status_due_.store(true);
}

void Runtime::ApplySubscriptions(const mqtt::IntakeOptions& intake_options) {
  core::Result<std::unique_ptr<mqtt::SampleIntake>> made = MakeIntake(intake_options);
  if (!made.ok()) {  // BuildServiceOptions compiled the same rules, so not expected
    spdlog::error("reload: mqtt.subscriptions not applied: {}", made.status().message());
    return;
  }
  std::unique_ptr<mqtt::SampleIntake> next = std::move(made).value();
  const std::vector<std::pair<std::string, int>> filters = next->Filters();
  {
    // No message is being mapped while the intake changes; counters() reads under intake_mutex_.
    const std::lock_guard handler_lock(handler_mutex_);
    const std::lock_guard lock(intake_mutex_);
    const mqtt::IntakeStats old = intake_->stats();
    retired_bad_payloads_ += old.bad_payloads;
    retired_unmapped_ += old.unmapped;
    intake_.swap(next);
  }
  const auto has = [](const std::vector<std::pair<std::string, int>>& list,
                      const std::string& filter) {
    return std::any_of(list.begin(), list.end(), [&](const auto& f) { return f.first == filter; });
  };
  for (const auto& [filter, qos] : filters_) {
    if (has(filters, filter) || filter == options_.command_topic) continue;
    if (core::Status s = bus_.Unsubscribe(filter); !s.ok()) {
      spdlog::warn("reload: {}", s.message());
    }
    spdlog::info("reload: unsubscribed from {}", filter);
  }
  for (const auto& [filter, qos] : filters) {
    if (core::Status s = bus_.Subscribe(filter, qos); !s.ok()) {
      spdlog::error("reload: {}", s.message());
      continue;
    }
    if (!has(filters_, filter)) spdlog::info("reload: subscribed to {} (QoS {})", filter, qos);
  }
  filters_ = filters;
  filter_count_.store(filters_.size() + 1);
  spdlog::info("reload: mqtt.subscriptions applied ({} topic rules)", intake_options.rules.size());
}

void Runtime::Stop() {
  if (stopped_) return;
  stopped_ = true;
  stopping_.store(true);
  {
    const std::lock_guard lock(handler_mutex_);
    if (accepting_) FlushSamples();  // a batch cut short by the stop is still processed
    accepting_ = false;
  }
  for (auto& worker : workers_) worker->StopAndJoin();
  if (started_) {
    PublishStatus("offline", "stopped");
    bus_.Stop();
  }
}

StatusCounters Runtime::counters() const {
  StatusCounters c;
  c.workers = static_cast<std::int64_t>(workers_.size());
  for (const auto& worker : workers_) {
    const WorkerCounters w = worker->counters();
    c.channels += static_cast<std::int64_t>(w.channels);
    c.samples += w.samples;
    c.alerts += w.alerts;
    c.drop_holes += w.holes;
  }
  {
    const std::lock_guard lock(intake_mutex_);
    const mqtt::IntakeStats intake = intake_->stats();
    c.bad_payloads = retired_bad_payloads_ + intake.bad_payloads;
    c.unmapped = retired_unmapped_ + intake.unmapped;
  }
  {
    const std::lock_guard lock(restart_mutex_);
    c.restart_pending = restart_pending_;
  }
  c.dropped = dropped_.load(std::memory_order_relaxed);
  c.commands = commands_.load(std::memory_order_relaxed);
  c.reloads = reloads_.load(std::memory_order_relaxed);
  c.reload_failures = reload_failures_.load(std::memory_order_relaxed);
  const mqtt::BusStats bus = bus_.stats();
  c.outbox = bus.outbox_size;
  c.reconnects = bus.reconnects;
  return c;
}

MetricsSnapshot Runtime::metrics() const {
  MetricsSnapshot m;
  for (const auto& worker : workers_) {
    const WorkerCounters w = worker->counters();
    m.samples_processed += w.samples;
    m.samples_rejected += w.rejected;
    m.drop_holes += w.holes;
    const WorkerMetrics& wm = worker->metrics();
    wm.latency.AddTo(m.latency);
    for (std::size_t k = 0; k < kAlertKindCount; ++k) {
      m.alerts_by_kind[k] += wm.alerts_by_kind[k].load(std::memory_order_relaxed);
    }
    for (std::size_t k = 0; k < kChannelStateCount; ++k) {
      m.channels_by_state[k] += wm.channels_by_state[k].load(std::memory_order_relaxed);
    }
  }
  m.samples_received = received_.load(std::memory_order_relaxed);
  m.samples_dropped = dropped_.load(std::memory_order_relaxed);
  const std::lock_guard lock(intake_mutex_);
  const mqtt::IntakeStats intake = intake_->stats();
  m.bad_payloads = retired_bad_payloads_ + intake.bad_payloads;
  m.unmapped = retired_unmapped_ + intake.unmapped;
  return m;
}

bool Runtime::ready() const {
  const mqtt::BusStats bus = bus_.stats();
  return bus.connected && bus.subscribe_acks >= filter_count_.load();
}

void Runtime::PublishStatus(std::string_view state, std::string_view reason) {
  const core::Status s = bus_.Publish(options_.status_topic,
                                      StatusJson(state, reason, started_at_, clock_(), counters()),
                                      options_.qos, true);
  if (!s.ok()) spdlog::debug("status not published: {}", s.message());
}

}  // namespace nightjar::service
