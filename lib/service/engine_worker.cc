#include "service/engine_worker.h"

#include <spdlog/spdlog.h>

#include <algorithm>
#include <chrono>

#include "core/alert_json.h"
#include "service/state_json.h"
#include "service/topics.h"

namespace nightjar::service {
namespace {

constexpr std::chrono::milliseconds kSweepPeriod(100);
constexpr core::TimestampUs kSweepPeriodUs = 100'000;

}  // namespace

EngineWorker::EngineWorker(int index, std::shared_ptr<const config::LoadedConfig> config,
                           WorkerTopics topics, std::size_t queue_capacity, mqtt::MessageBus& bus,
                           Clock clock, WorkerStateOptions state)
    : index_(index),
      topics_(std::move(topics)),
      bus_(bus),
      clock_(std::move(clock)),
      queue_(queue_capacity),
      config_(std::move(config)),
      engine_(config_->engine, config_->Resolver()),
      state_(index, std::move(state)) {}

EngineWorker::~EngineWorker() { StopAndJoin(); }

void EngineWorker::Start() {
  if (!thread_.joinable()) thread_ = std::thread([this] { Run(); });
}

void EngineWorker::StopAndJoin() {
  if (!thread_.joinable()) return;
  queue_.PushControl(StopItem{});
  thread_.join();
}

WorkerCounters EngineWorker::counters() const {
  WorkerCounters c;
  c.samples = samples_.load(std::memory_order_relaxed);
  c.rejected = rejected_.load(std::memory_order_relaxed);
  c.alerts = alerts_published_.load(std::memory_order_relaxed);
  c.channels = channels_.load(std::memory_order_relaxed);
  c.channels_kept = kept_.load(std::memory_order_relaxed);
  c.channels_reset = reset_.load(std::memory_order_relaxed);
  c.checkpoints = checkpoints_.load(std::memory_order_relaxed);
  c.holes = holes_.load(std::memory_order_relaxed);
  return c;
}

std::size_t EngineWorker::OfferBatch(std::vector<SampleItem>& samples) {
  // Channels of the batch with an open hole, noted before the queue takes (moves) the
  // samples: an accepted one closes its hole. Holes are rare, so this is mostly skipped.
  hole_candidates_.clear();
  if (!open_holes_.empty()) {
    for (std::size_t i = 0; i < samples.size(); ++i) {
      if (open_holes_.find(samples[i].channel) != open_holes_.end()) {
        hole_candidates_.emplace_back(i, samples[i].channel);
      }
    }
  }
  const std::size_t taken = queue_.TryPushBatch(samples);
  // The accepted samples are the batch's first `taken`, so closing holes before opening
  // new ones is the order of offering the samples one at a time.
  for (const auto& [index, channel] : hole_candidates_) {
    if (index < taken) open_holes_.erase(channel);
  }
  for (std::size_t i = taken; i < samples.size(); ++i) {
    const SampleItem& sample = samples[i];
    if (open_holes_.insert(sample.channel).second) {  // the first drop of this hole
      holes_.fetch_add(1, std::memory_order_relaxed);
      queue_.PushMarker(SampleItem{.channel = sample.channel,
                                   .time = sample.time,
                                   .value = 0.0,
                                   .arrived = sample.arrived,
                                   .hole = true});
    }
  }
  return taken;
}

void EngineWorker::Run() {
  std::vector<SampleItem> samples;
  std::vector<ControlItem> controls;
  bool stopping = false;
  state_.LoadAtStart(engine_);
  TrackChannels(state_.loads_from_save_dir());
  while (!stopping) {
    queue_.PopAll(kSweepPeriod, samples, controls);
    const core::TimestampUs now = clock_();
    for (const ControlItem& control : controls) {
      if (const auto* command = std::get_if<CommandItem>(&control)) {
        HandleCommand(*command, now);
      } else if (const auto* reload = std::get_if<ReloadItem>(&control)) {
        HandleReload(*reload, now);
      } else if (std::holds_alternative<CheckpointItem>(control)) {
        Checkpoint("interval");
      } else {
        stopping = true;  // after the samples already queued
      }
    }
    HandleSamples(samples, now);
    if (now >= last_sweep_ + kSweepPeriodUs || now < last_sweep_) Sweep(now, false);
  }
  // Whatever arrived between the stop request and now (the intake is closed by then).
  queue_.PopAll(std::chrono::milliseconds(0), samples, controls);
  const core::TimestampUs now = clock_();
  HandleSamples(samples, now);
  Sweep(now, /*flush=*/true);
  Checkpoint("stop");
}

void EngineWorker::TrackChannels(bool saved) {
  views_.resize(engine_.channel_count());
  unsaved_.resize(engine_.channel_count(), saved ? 0 : 1);
  channels_.store(engine_.channel_count(), std::memory_order_relaxed);
}

void EngineWorker::Checkpoint(std::string_view why) {
  if (!state_.saves()) return;
  state_.Save(engine_, why, &unsaved_);
  checkpoints_.fetch_add(1, std::memory_order_relaxed);
}

core::TimestampUs EngineWorker::EngineNow(core::TimestampUs wall) const {
  if (!has_sample_) return wall;
  return newest_time_ + std::max<core::TimestampUs>(0, wall - newest_wall_);
}

void EngineWorker::HandleHole(const SampleItem& marker) {
  const std::optional<core::ChannelId> id = engine_.FindChannel(marker.channel);
  if (id) engine_.NoteDiscontinuity(*id, core::Discontinuity::kDropped);
  const std::uint64_t n = ++holes_logged_;
  // Powers of two only: under a lasting overload every channel has holes.
  if ((n & (n - 1)) == 0) {
    spdlog::warn(
        "worker {}: samples of {} dropped at a full queue ({} such holes so far): not a "
        "sensor gap, no gap alarm for it",
        index_, marker.channel, n);
  }
}

void EngineWorker::HandleSamples(const std::vector<SampleItem>& samples, core::TimestampUs now) {
  // Every channel is looked up first, in one tight loop: with thousands of channels a
  // lookup is mostly a cache miss, and independent lookups back to back let the CPU wait
  // for many misses at once instead of one per sample between two model updates.
  ids_.resize(samples.size());
  for (std::size_t i = 0; i < samples.size(); ++i) {
    ids_[i] = samples[i].hole ? std::nullopt : engine_.FindChannel(samples[i].channel);
  }
  for (std::size_t i = 0; i < samples.size(); ++i) HandleSample(samples[i], ids_[i], now);
}

void EngineWorker::HandleSample(const SampleItem& sample, std::optional<core::ChannelId> id,
                                core::TimestampUs now) {
  if (sample.hole) {
    HandleHole(sample);
    return;
  }
  // Not found before the batch: an earlier sample of it may have added it since.
  if (!id) id = engine_.FindChannel(sample.channel);
  if (!id && state_.LoadNewChannel(engine_, sample.channel)) {
    id = engine_.FindChannel(sample.channel);
    TrackChannels(state_.loads_from_save_dir());
  }
  if (!id) {
    core::Result<core::ChannelId> added = engine_.AddChannel(sample.channel);
    if (!added.ok()) {
      const std::uint64_t n = rejected_.fetch_add(1, std::memory_order_relaxed) + 1;
      // Powers of two only: a channel whose options are bad must not flood the log.
      if ((n & (n - 1)) == 0) {
        spdlog::error("worker {}: sample rejected ({} so far): {}", index_, n,
                      added.status().message());
      }
      return;
    }
    id = *added;
    TrackChannels(false);
  }
  engine_.Process(*id, sample.time, sample.value, alerts_);
  samples_.fetch_add(1, std::memory_order_relaxed);
  if (!has_sample_ || sample.time >= newest_time_) {
    has_sample_ = true;
    newest_time_ = sample.time;
    newest_wall_ = now;
  }
  unsaved_[*id] = 1;
  ChannelView& view = views_[*id];
  view.last_sample = view.sampled ? std::max(view.last_sample, sample.time) : sample.time;
  view.sampled = true;
  view.dirty = true;
  PublishAlerts();
  metrics_.latency.Record(std::chrono::duration_cast<std::chrono::nanoseconds>(
                              std::chrono::steady_clock::now() - sample.arrived)
                              .count());
  MaybePublishState(*id, now, false);
}

void EngineWorker::HandleCommand(const CommandItem& item, core::TimestampUs now) {
  const OperatorCommand& command = item.parsed.command;
  const core::TimestampUs at = EngineNow(now);
  core::Status result;
  switch (command.action) {
    case CommandAction::kAcknowledge:
      result = engine_.Acknowledge(command.channel, command.condition, at);
      break;
    case CommandAction::kShelve: {
      const auto length = static_cast<core::TimestampUs>(command.duration_s * 1e6);
      result = engine_.Shelve(command.channel, command.condition, at, at + length);
      break;
    }
    case CommandAction::kUnshelve:
      result = engine_.Unshelve(command.channel, command.condition, at, alerts_);
      break;
  }
  if (result.ok()) {
    spdlog::info("command {} {} {}: done", CommandActionName(command.action), command.channel,
                 core::AlarmConditionName(command.condition));
  } else {
    spdlog::warn("command {} {} {}: {}", CommandActionName(command.action), command.channel,
                 core::AlarmConditionName(command.condition), result.message());
  }
  const core::Status published =
      bus_.Publish(topics_.reply_topic, CommandReplyJson(item.parsed, result), topics_.qos, false);
  if (!published.ok()) spdlog::warn("reply not published: {}", published.message());
  PublishAlerts();
  if (const std::optional<core::ChannelId> id = engine_.FindChannel(command.channel)) {
    unsaved_[*id] = 1;  // an acknowledge or shelve is part of its checkpoint
    if (views_[*id].sampled) MaybePublishState(*id, now, true);
  }
}

void EngineWorker::HandleReload(const ReloadItem& item, core::TimestampUs now) {
  config_ = item.config;
  std::uint64_t kept = 0;
  std::uint64_t reset = 0;
  for (core::ChannelId id = 0; id < engine_.channel_count(); ++id) {
    const core::ChannelOptions options = config_->Resolve(engine_.channel_name(id));
    if (config::SameChannelOptions(engine_.channel_options(id), options)) {
      ++kept;
      continue;
    }
    if (const core::Status s =
            engine_.ResetChannel(id, options, EngineNow(now),
                                 "channel reset by a config reload (its options changed)", alerts_);
        !s.ok()) {
      spdlog::error("reload: {} keeps its old options: {}", engine_.channel_name(id), s.message());
      ++kept;
      continue;
    }
    ++reset;
    spdlog::info("reload: {} has new options and learns again", engine_.channel_name(id));
    views_[id].dirty = true;
    unsaved_[id] = 1;
  }
  engine_.Reconfigure(config_->engine, config_->Resolver());
  PublishAlerts();  // the clears of reset channels, before anything they learn anew
  kept_.fetch_add(kept, std::memory_order_relaxed);
  reset_.fetch_add(reset, std::memory_order_relaxed);
}

void EngineWorker::PublishAlerts() {
  for (const core::Alert& alert : alerts_) {
    // An alert is an alarm edge, so the channel's checkpoint changed (a gap raised by the
    // clock comes without a sample).
    if (const std::optional<core::ChannelId> id = engine_.FindChannel(alert.channel)) {
      unsaved_[*id] = 1;
    }
    ChannelTopic(topics_.alert_prefix, alert.channel, &topic_);
    payload_.clear();
    core::AppendAlertJson(alert, &payload_);
    const core::Status s = bus_.Publish(topic_, payload_, topics_.qos, false);
    if (!s.ok()) spdlog::warn("alert not published: {}", s.message());
    alerts_published_.fetch_add(1, std::memory_order_relaxed);
    metrics_.alerts_by_kind[static_cast<std::size_t>(alert.kind)].fetch_add(
        1, std::memory_order_relaxed);
    spdlog::info("alert {} {} {} {}: {}", core::AlertPhaseName(alert.phase), alert.channel,
                 core::AlertKindName(alert.kind), core::DetectorName(alert.detector),
                 alert.message);
  }
  alerts_.clear();
}

void EngineWorker::MaybePublishState(core::ChannelId id, core::TimestampUs now, bool force) {
  ChannelView& view = views_[id];
  const core::ChannelStatus status = engine_.channel_status(id);
  if (!view.counted || status.state != view.counted_state) {
    if (view.counted) {
      metrics_.channels_by_state[static_cast<std::size_t>(view.counted_state)].fetch_sub(
          1, std::memory_order_relaxed);
    }
    metrics_.channels_by_state[static_cast<std::size_t>(status.state)].fetch_add(
        1, std::memory_order_relaxed);
    view.counted = true;
    view.counted_state = status.state;
  }
  const bool changed = !view.published || status.state != view.state;
  const auto interval = static_cast<core::TimestampUs>(topics_.publish_interval_s * 1e6);
  const bool due = view.dirty && (now >= view.published_at + interval || now < view.published_at);
  if (!force && !changed && !due) return;
  const std::string& name = engine_.channel_name(id);
  ChannelTopic(topics_.state_prefix, name, &topic_);
  ChannelStateJson(name, status, view.last_sample, &payload_);
  const core::Status s = bus_.Publish(topic_, payload_, topics_.qos, true);
  if (!s.ok()) spdlog::warn("state of {} not published: {}", name, s.message());
  view.published = true;
  view.state = status.state;
  view.published_at = now;
  view.dirty = false;
}

void EngineWorker::Sweep(core::TimestampUs now, bool flush) {
  last_sweep_ = now;
  // Not before the first sample: the wall clock would set the engine's clock ahead of a
  // time base that runs behind it, and no gap could be seen after that.
  if (has_sample_) engine_.AdvanceClock(EngineNow(now), alerts_);
  PublishAlerts();
  for (core::ChannelId id = 0; id < engine_.channel_count(); ++id) {
    if (!views_[id].sampled) continue;  // loaded from a file: its state shows at its first sample
    MaybePublishState(id, now, flush && views_[id].dirty);
  }
}

}  // namespace nightjar::service
