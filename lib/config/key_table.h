// The config key table: one row per user-settable field of core::ChannelOptions.
//
// Each row names the key path (snake_case, mirroring the struct fields: "predictor.hidden_size"),
// its bounds, unit and a one-line doc, and reaches the field through an accessor. The value
// type and the default come from the field itself (core::ChannelOptions{}), so they cannot
// drift from the struct. Parsing, bounds messages, RenderReferenceYaml(), `nightjar
// check-config` and the tests that keep config/nightjar.yaml complete all read this table.
// predictor.input_size and predictor.seed are set by the engine and are not keys.
// `events` is a list of core::EventTemplate; the keys of one entry have their own small
// table (EventTemplateKeys) built the same way.
// Thread-safety: the table is immutable static data; the functions are pure.
#pragma once

#include <limits>
#include <optional>
#include <span>
#include <string>
#include <string_view>
#include <variant>
#include <vector>

#include "core/alert.h"
#include "core/engine_options.h"
#include "core/template_matcher.h"

namespace nightjar::config {

// The value types a key can have, in the order of Value's alternatives.
enum class ValueType {
  kString,
  kBool,
  kInt,
  kDouble,
  kPriority,    // low | medium | high
  kForecaster,  // lstm | last_value
  kEvents,      // a list of event templates (mappings with the EventTemplateKeys)
  kNumberList,  // a list of numbers (an event template's shape)
};

// A parsed key value; its alternative index equals the key's ValueType.
using Value = std::variant<std::string, bool, int, double, core::Priority, core::Forecaster,
                           std::vector<core::EventTemplate>, std::vector<double>>;

// Where a key's value lives inside a ChannelOptions; the alternative index is the ValueType.
using FieldRef = std::variant<std::string*, bool*, int*, double*, core::Priority*,
                              core::Forecaster*, std::vector<core::EventTemplate>*>;

// Where a key's value lives inside one EventTemplate.
using EventFieldRef = std::variant<std::string*, int*, double*, std::vector<double>*>;

// An interval over the reals (ints are checked against it too). An infinite end that is
// closed admits that infinity (".inf" in YAML); an open infinite end means "finite".
struct Bounds {
  double lo = -std::numeric_limits<double>::infinity();
  double hi = std::numeric_limits<double>::infinity();
  bool lo_open = false;
  bool hi_open = false;

  bool Contains(double x) const;  // false for NaN
  // "[1, 1024]", "(0, 1]", ">= 0", "> 0", "a finite number", "any number (.inf and -.inf allowed)".
  std::string Describe() const;
};

struct KeySpec {
  std::string_view path;  // "thresholds.false_alarms_per_day"
  FieldRef (*field)(core::ChannelOptions& options);
  Bounds bounds;          // for kInt and kDouble; ignored otherwise
  std::string_view unit;  // "s", "samples", ... or empty for dimensionless
  std::string_view doc;   // one line, no trailing period

  ValueType type() const;
  std::string_view section() const;  // "thresholds"; empty for a top-level key
  std::string_view name() const;     // "false_alarms_per_day"
};

// Every key, grouped by section in ChannelOptions field order.
std::span<const KeySpec> ChannelKeys();

// One key of an `events:` entry, e.g. "max_distance" (full path "events[0].max_distance").
struct EventKeySpec {
  std::string_view name;
  EventFieldRef (*field)(core::EventTemplate& event);
  Bounds bounds;  // for numbers (each value, for kNumberList)
  std::string_view unit;
  std::string_view doc;
  bool required = false;  // name and shape have no usable default

  ValueType type() const;  // kString, kInt, kDouble or kNumberList
};

// The keys of an `events:` entry, in EventTemplate field order.
std::span<const EventKeySpec> EventTemplateKeys();
const EventKeySpec* FindEventKey(std::string_view name);
void SetEventValue(const EventKeySpec& key, const Value& value, core::EventTemplate& event);
Value DefaultEventValue(const EventKeySpec& key);

// The row for a full key path, or null.
const KeySpec* FindKey(std::string_view path);

// Reads or writes the field of `options` that `key` names. SetValue requires
// value.index() == key.type() (asserted).
Value GetValue(const KeySpec& key, const core::ChannelOptions& options);
void SetValue(const KeySpec& key, const Value& value, core::ChannelOptions& options);

// Whether every key has the same value in `a` and `b` (a config reload keeps a channel's
// learnt state exactly when this holds for its old and new options).
bool SameChannelOptions(const core::ChannelOptions& a, const core::ChannelOptions& b);

// The key's value in a default-constructed core::ChannelOptions.
Value DefaultValue(const KeySpec& key);

// YAML text for a value that reads back to exactly that value: doubles in shortest
// round-trip form (".inf", "-.inf" for infinities), strings double-quoted, enums by name,
// lists in flow style ("[]", "[1, 2]", "[{name: ..., shape: [...], ...}]").
std::string FormatValue(const Value& value);

// "low" / "medium" / "high" -> Priority.
std::optional<core::Priority> ParsePriority(std::string_view text);
// "lstm" / "last_value" -> Forecaster.
std::optional<core::Forecaster> ParseForecaster(std::string_view text);

}  // namespace nightjar::config
