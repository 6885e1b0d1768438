#include "core/engine.h"

#include <algorithm>
#include <limits>
#include <utility>

namespace nightjar::core {

namespace {
// Process() sweeps all channels for gaps at most once per second of sample time.
constexpr TimestampUs kGapSweepInterval = kMicrosPerSecond;
}  // namespace

std::uint64_t ChannelSeed(std::uint64_t engine_seed, std::string_view channel) {
  // FNV-1a over the name, then one splitmix64 round with the engine seed mixed in.
  std::uint64_t hash = 1469598103934665603ull;
  for (const char c : channel) {
    hash ^= static_cast<unsigned char>(c);
    hash *= 1099511628211ull;
  }
  std::uint64_t z = hash ^ (engine_seed + 0x9e3779b97f4a7c15ull);
  z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ull;
  z = (z ^ (z >> 27)) * 0x94d049bb133111ebull;
  return z ^ (z >> 31);
}

Engine::Engine(EngineOptions options, ChannelOptionsResolver resolver)
    : options_(std::move(options)), resolver_(std::move(resolver)) {}

Engine::~Engine() = default;

Result<ChannelId> Engine::AddChannel(std::string_view name) {
  return AddChannel(name, resolver_ ? resolver_(name) : options_.defaults);
}

Result<ChannelId> Engine::AddChannel(std::string_view name, const ChannelOptions& options) {
  if (name.empty()) return Status::InvalidArgument("channel name is empty");
  if (ids_.find(name) != ids_.end()) {
    return Status::InvalidArgument("channel '" + std::string(name) + "' already exists");
  }
  if (Status valid = ValidateChannelOptions(options); !valid.ok()) {
    return Status::InvalidArgument("channel '" + std::string(name) + "': " + valid.message());
  }
  EnsureWorkspace(options);
  const auto id = static_cast<ChannelId>(channels_.size());
  channels_.push_back(std::make_unique<ChannelPipeline>(std::string(name), options,
                                                        ChannelSeed(options_.seed, name)));
  options_of_.push_back(options);
  asset_of_.push_back(AssetOfChannel(name, options.asset));
  context_of_.emplace_back();
  JoinAsset(id);
  ids_.emplace(std::string(name), id);
  channels_.back()->set_residual_tap(tap_, id);
  return id;
}

void Engine::Group(std::vector<Alert>& out, std::size_t from) {
  for (std::size_t i = from; i < out.size(); ++i) {
    Alert& alert = out[i];
    if (alert.kind != AlertKind::kAnomaly) continue;  // annunciated, no episode: the defaults
    const auto it = ids_.find(alert.channel);
    if (it == ids_.end()) {
      episodes_.Annotate({}, 0, alert);
      continue;
    }
    episodes_.Annotate(asset_of_[it->second], FromSeconds(options_of_[it->second].episode_window_s),
                       alert);
  }
}

void Engine::JoinAsset(ChannelId id) {
  const std::string& asset = asset_of_[id];
  if (asset.empty()) {
    asset_slot_.push_back(kNoAsset);
    return;
  }
  auto [it, added] = asset_slots_.try_emplace(asset, asset_sizes_.size());
  if (added) asset_sizes_.push_back(0);
  ++asset_sizes_[it->second];
  asset_slot_.push_back(it->second);
}

std::size_t Engine::asset_channels(ChannelId id) const {
  const std::size_t slot = asset_slot_[id];
  return slot == kNoAsset ? 1 : asset_sizes_[slot];
}

void Engine::RegroupRestored(ChannelId id) {
  const std::string& asset = asset_of_[id];
  const ChannelPipeline& channel = *channels_[id];
  episodes_.NoteSilenced(asset, channel.name());
  const Alarm& alarm = channel.alarm(AlarmCondition::kAnomaly);
  if (alarm.active() && !alarm.silenced()) {
    episodes_.NoteActive(asset, channel.name(), alarm.raised_at().value_or(0),
                         options_of_[id].anomaly_priority);
  }
}

std::size_t Engine::ConcludeKnownGood() {
  std::size_t armed = 0;
  for (ChannelId id = 0; id < channels_.size(); ++id) {
    channels_[id]->set_asset_channels(asset_channels(id));
    if (channels_[id]->ConcludeKnownGood(designer_)) ++armed;
  }
  return armed;
}

void Engine::Reconfigure(EngineOptions options, ChannelOptionsResolver resolver) {
  options_ = std::move(options);
  resolver_ = std::move(resolver);
}

Status Engine::ResetChannel(ChannelId channel, const ChannelOptions& options) {
  if (channel >= channels_.size()) return Status::NotFound("no channel with that id");
  const std::string name = channels_[channel]->name();
  if (Status valid = ValidateChannelOptions(options); !valid.ok()) {
    return Status::InvalidArgument("channel '" + name + "': " + valid.message());
  }
  EnsureWorkspace(options);
  channels_[channel] =
      std::make_unique<ChannelPipeline>(name, options, ChannelSeed(options_.seed, name));
  channels_[channel]->set_residual_tap(tap_, channel);
  options_of_[channel] = options;
  context_of_[channel].clear();
  episodes_.NoteSilenced(asset_of_[channel], name);  // the new pipeline is in no alarm
  return Status::Ok();
}

Status Engine::ResetChannel(ChannelId channel, const ChannelOptions& options, TimestampUs now,
                            std::string_view why, std::vector<Alert>& out) {
  if (channel >= channels_.size()) return Status::NotFound("no channel with that id");
  if (Status valid = ValidateChannelOptions(options); !valid.ok()) {
    return Status::InvalidArgument("channel '" + channels_[channel]->name() +
                                   "': " + valid.message());
  }
  const std::size_t before = out.size();
  const ChannelPipeline& old = *channels_[channel];
  const ChannelOptions& was = options_of_[channel];
  const ChannelStatus status = old.status();
  constexpr Detector kSensorDetector[kAlarmConditionCount] = {
      Detector::kCusum, Detector::kNotFinite, Detector::kRange, Detector::kFlatline,
      Detector::kGap};
  for (int i = 0; i < kAlarmConditionCount; ++i) {
    const auto condition = static_cast<AlarmCondition>(i);
    if (!old.alarm(condition).active()) continue;
    const bool anomaly = condition == AlarmCondition::kAnomaly;
    Alert alert;
    alert.time = now;
    alert.channel = old.name();
    alert.kind = anomaly ? AlertKind::kAnomaly : AlertKind::kSensor;
    alert.detector = anomaly ? status.last_detector : kSensorDetector[i];
    alert.phase = AlertPhase::kClear;
    alert.value = status.last_value;
    alert.expected = anomaly ? status.last_expected : std::numeric_limits<double>::quiet_NaN();
    alert.z = anomaly ? status.last_z : std::numeric_limits<double>::quiet_NaN();
    alert.statistic = std::numeric_limits<double>::quiet_NaN();  // the new pipeline has none
    alert.threshold = std::numeric_limits<double>::quiet_NaN();
    alert.priority = anomaly ? was.anomaly_priority : was.sensor_priority;
    alert.message = old.name() + ": " + AlarmConditionName(condition) + " alarm cleared: ";
    alert.message.append(why);
    out.push_back(std::move(alert));
  }
  Group(out, before);
  return ResetChannel(channel, options);
}

void Engine::EnsureWorkspace(const ChannelOptions& options) {
  const int inputs = MaxPredictorInputCount(options);
  const int hidden = options.predictor.hidden_size;
  const int window = options.predictor.window;
  if (workspace_ && inputs <= workspace_inputs_ && hidden <= workspace_hidden_ &&
      window <= workspace_window_) {
    return;
  }
  workspace_inputs_ = std::max(workspace_inputs_, inputs);
  workspace_hidden_ = std::max(workspace_hidden_, hidden);
  workspace_window_ = std::max(workspace_window_, window);
  workspace_ = std::make_unique<LstmWorkspace<float>>(workspace_inputs_, workspace_hidden_,
                                                      workspace_window_);
}

void Engine::set_residual_tap(ResidualTap* tap) {
  tap_ = tap;
  for (std::size_t i = 0; i < channels_.size(); ++i) {
    channels_[i]->set_residual_tap(tap, static_cast<ChannelId>(i));
  }
}

std::optional<ChannelId> Engine::FindChannel(std::string_view name) const {
  if (auto it = ids_.find(name); it != ids_.end()) return it->second;
  return std::nullopt;
}

void Engine::Process(const Sample& sample, std::vector<Alert>& out) {
  std::optional<ChannelId> id = FindChannel(sample.channel);
  if (!id) {
    Result<ChannelId> added = AddChannel(sample.channel);
    if (!added.ok()) {
      ++rejected_samples_;
      return;
    }
    id = *added;
  }
  Process(*id, sample.time, sample.value, out);
}

void Engine::Process(ChannelId channel, TimestampUs time, double value, std::vector<Alert>& out) {
  const std::size_t before = out.size();
  if (!clock_started_ || time >= clock_ + kGapSweepInterval) AdvanceClock(time, out);
  ChannelPipeline& pipeline = *channels_[channel];
  const std::int64_t relearns = pipeline.relearn_count();
  pipeline.set_asset_channels(asset_channels(channel));
  if (pipeline.context_due()) FixContext(channel);
  pipeline.set_context(GatherContext(channel));
  pipeline.Process(time, value, designer_, *workspace_, out);
  if (pipeline.relearn_count() != relearns) RelearnAssetWith(channel, time, out);
  if (out.size() != before) Group(out, before);
}

void Engine::FixContext(ChannelId channel) {
  const ContextOptions& context = options_of_[channel].context;
  const std::size_t slot = asset_slot_[channel];
  std::vector<std::string> names;
  std::vector<ChannelId>& ids = context_of_[channel];
  ids.clear();
  if (context.from_asset && slot != kNoAsset) {
    // Once per channel, so a scan of all channels is fine.
    for (ChannelId id = 0; id < channels_.size(); ++id) {
      if (names.size() >= static_cast<std::size_t>(context.max_channels)) break;
      if (id == channel || asset_slot_[id] != slot) continue;
      names.push_back(channels_[id]->name());
      ids.push_back(id);
    }
  }
  channels_[channel]->FixContext(std::move(names));
}

void Engine::ResolveContext(ChannelId channel) {
  const std::vector<std::string>& names = channels_[channel]->context_names();
  std::vector<ChannelId>& ids = context_of_[channel];
  ids.assign(names.size(), kUnresolved);
  for (std::size_t i = 0; i < names.size(); ++i) {
    if (const std::optional<ChannelId> found = FindChannel(names[i])) ids[i] = *found;
  }
}

std::span<const ContextSource> Engine::GatherContext(ChannelId channel) {
  const std::vector<std::string>& names = channels_[channel]->context_names();
  std::vector<ChannelId>& ids = context_of_[channel];
  if (names.empty()) return {};
  if (ids.size() != names.size()) ResolveContext(channel);
  if (context_values_.size() < names.size()) context_values_.resize(names.size());
  for (std::size_t i = 0; i < names.size(); ++i) {
    // A context channel restored from a checkpoint may not exist yet: look again.
    if (ids[i] == kUnresolved) {
      if (const std::optional<ChannelId> found = FindChannel(names[i])) ids[i] = *found;
    }
    context_values_[i] =
        ids[i] == kUnresolved ? ContextSource{} : channels_[ids[i]]->context_source();
  }
  return {context_values_.data(), names.size()};
}

void Engine::RelearnAssetWith(ChannelId channel, TimestampUs now, std::vector<Alert>& out) {
  const std::optional<TimestampUs> resume = channels_[channel]->relearnt_resume();
  const std::string& asset = asset_of_[channel];
  if (!resume || asset.empty()) return;
  // Rare (once per resume at a new operating point), so a scan of all channels is fine.
  for (ChannelId id = 0; id < channels_.size(); ++id) {
    if (id != channel && asset_of_[id] == asset) channels_[id]->RelearnWithAsset(*resume, now, out);
  }
}

void Engine::NoteDiscontinuity(ChannelId channel, Discontinuity reason) {
  if (channel < channels_.size()) channels_[channel]->NoteDiscontinuity(reason);
}

void Engine::AdvanceClock(TimestampUs now, std::vector<Alert>& out) {
  if (clock_started_ && now <= clock_) return;
  clock_started_ = true;
  clock_ = now;
  const std::size_t before = out.size();
  for (auto& channel : channels_) channel->CheckGap(now, out);
  if (out.size() != before) Group(out, before);
}

void Engine::SaveChannel(ChannelId id, std::vector<std::uint8_t>& out) const {
  EncodeChannelState(*channels_[id], out);
}

Status Engine::LoadChannel(std::string_view name, std::span<const std::uint8_t> bytes,
                           StateProblem* problem) {
  if (problem != nullptr) *problem = StateProblem::kNone;
  if (name.empty()) return Status::InvalidArgument("channel name is empty");
  const ChannelOptions options = resolver_ ? resolver_(name) : options_.defaults;
  if (Status valid = ValidateChannelOptions(options); !valid.ok()) {
    return Status::InvalidArgument("channel '" + std::string(name) + "': " + valid.message());
  }
  // Decoded into a fresh pipeline so a bad checkpoint cannot leave a half-written channel.
  auto restored = std::make_unique<ChannelPipeline>(std::string(name), options,
                                                    ChannelSeed(options_.seed, name));
  if (Status decoded = DecodeChannelState(bytes, *restored, problem); !decoded.ok()) {
    return decoded;
  }
  EnsureWorkspace(options);
  restored->NoteDiscontinuity(Discontinuity::kRestart);
  if (const std::optional<ChannelId> id = FindChannel(name)) {
    restored->set_residual_tap(tap_, *id);
    channels_[*id] = std::move(restored);
    options_of_[*id] = options;
    ResolveContext(*id);
    RegroupRestored(*id);
    return Status::Ok();
  }
  const auto id = static_cast<ChannelId>(channels_.size());
  restored->set_residual_tap(tap_, id);
  channels_.push_back(std::move(restored));
  options_of_.push_back(options);  // channel_options(id) must hold for a loaded channel too
  asset_of_.push_back(AssetOfChannel(name, options.asset));
  context_of_.emplace_back();
  JoinAsset(id);
  ids_.emplace(std::string(name), id);
  ResolveContext(id);
  RegroupRestored(id);
  return Status::Ok();
}

Result<ChannelPipeline*> Engine::Find(std::string_view name) {
  if (auto it = ids_.find(name); it != ids_.end()) return channels_[it->second].get();
  return Status::NotFound("no channel named '" + std::string(name) + "'");
}

Status Engine::Acknowledge(std::string_view channel, AlarmCondition condition, TimestampUs now) {
  Result<ChannelPipeline*> found = Find(channel);
  if (!found.ok()) return found.status();
  return (*found)->Acknowledge(condition, now);
}

Status Engine::Shelve(std::string_view channel, AlarmCondition condition, TimestampUs now,
                      TimestampUs until) {
  Result<ChannelPipeline*> found = Find(channel);
  if (!found.ok()) return found.status();
  Status shelved = (*found)->Shelve(condition, now, until);
  if (shelved.ok() && condition == AlarmCondition::kAnomaly) {
    episodes_.NoteSilenced(asset_of_[ids_.find(channel)->second], channel);
  }
  return shelved;
}

Status Engine::Unshelve(std::string_view channel, AlarmCondition condition, TimestampUs now,
                        std::vector<Alert>& out) {
  Result<ChannelPipeline*> found = Find(channel);
  if (!found.ok()) return found.status();
  const std::size_t before = out.size();
  Status unshelved = (*found)->Unshelve(condition, now, out);
  Group(out, before);
  return unshelved;
}

}  // namespace nightjar::core
