// The nightjar config file: one YAML file shared by replay, tune and the MQTT daemon.
//
// Layout (config/nightjar.yaml is the documented example):
//
//   engine:            # engine-wide settings
//     seed: 1          # mixed with each channel's name to seed its model
//   defaults:          # every channel starts from these; any ChannelOptions key (key_table.h)
//     warmup_samples: 1800
//     thresholds: { false_alarms_per_day: 0.5 }
//   channels:          # ordered override blocks; every block whose `match` glob (glob.h)
//     - match: "cw2.pump_a.*"     # matches the channel applies, in file order, so later
//       unit: "m3/h"              # blocks override earlier ones key by key
//
// Every section and key is optional; an empty file means built-in defaults. Keys are
// nested maps (`sensor: { min_value: 0 }`); dotted keys ("sensor.min_value: 0") are not
// accepted. `events:` is a list of shape templates ({name, shape: [...], band, max_distance,
// min_spread_ratio}); a block that sets it replaces the whole list (lists are not merged).
// `mqtt:` and `daemon:` configure `nightjar run` (service_config.h); replay and tune ignore
// them. Any other top-level key is an error.
//
// Loading collects every error in one pass: YAML syntax, unknown keys (with a "did you
// mean" suggestion), wrong types, out-of-bounds values, bad globs, duplicate keys, and then
// core::ValidateChannelOptions on the defaults and on each block applied to the defaults.
// Each error names file, line, column (1-based) and the full key path, e.g.
// "plant.yaml:12:18: channels[1].sensor.max_value: must be ...".
//
// Thread-safety: loading is reentrant; a LoadedConfig is an immutable value once built, safe
// to share between threads for reading (Resolve, Resolver).
#pragma once

#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "config/glob.h"
#include "config/key_table.h"
#include "config/service_config.h"
#include "core/engine_options.h"

namespace nightjar::config {

struct ConfigError {
  std::string file;
  int line = 0;          // 1-based; 0 when the error is about the whole file (e.g. unreadable)
  int column = 0;        // 1-based; 0 with line
  std::string key_path;  // "channels[1].sensor.max_value"; empty for syntax errors
  std::string message;

  // "FILE:LINE:COL: KEY: MESSAGE", leaving out LINE:COL when line is 0 and KEY when empty.
  std::string ToString() const;
};

// One key set in a block, as written.
struct KeySetting {
  const KeySpec* key = nullptr;  // row of ChannelKeys()
  Value value;
  int line = 0;  // of the value
  int column = 0;
};

// One entry of `channels:`.
struct ChannelOverride {
  std::string match;  // the glob
  int line = 0;       // of the `match` value (of the block when match is missing)
  int column = 0;
  std::vector<KeySetting> settings;  // in file order

  bool Matches(std::string_view channel) const { return GlobMatch(match, channel); }
  // Writes every setting into `options`.
  void ApplyTo(core::ChannelOptions& options) const;
};

struct LoadedConfig {
  // engine.defaults holds the built-in defaults with `defaults:` applied.
  core::EngineOptions engine;
  std::vector<ChannelOverride> overrides;
  // The mqtt: and daemon: sections, built-in defaults where not set.
  ServiceConfig service;

  // engine.defaults, then every override whose glob matches `channel`, in order.
  core::ChannelOptions Resolve(std::string_view channel) const;
  // A resolver that owns a copy of this config (outlives it).
  core::ChannelOptionsResolver Resolver() const;
};

struct LoadResult {
  std::optional<LoadedConfig> config;  // set exactly when errors is empty
  std::vector<ConfigError> errors;     // in file order
  bool ok() const { return errors.empty(); }
};

// Reads and loads `path`; `path` is the file name in errors.
LoadResult LoadConfigFile(const std::string& path);
// Loads YAML text; `source_name` is the file name in errors.
LoadResult LoadConfigString(std::string_view yaml, std::string_view source_name);

// A complete config file listing every key with its default, unit, range and doc, generated
// from the key table. It loads with zero errors and resolves to core::ChannelOptions{}.
std::string RenderReferenceYaml();

}  // namespace nightjar::config
