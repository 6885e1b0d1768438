// The config key table (lib/config/key_table.h) against core::ChannelOptions: one row per
// field, each row reaching its own field, and bounds that agree with core's validation.
#include "config/key_table.h"

#include <gtest/gtest.h>

#include <cmath>
#include <cstddef>
#include <limits>
#include <map>
#include <regex>
#include <set>
#include <string>
#include <vector>

#include "core/engine_options.h"

namespace nightjar::config {
namespace {

// Counts the members of an aggregate: the largest N for which T{x1, ..., xN} is valid, each
// x convertible to anything. Common practice (the technique behind Boost.PFR's field count).
struct AnyField {
  template <typename T>
  operator T() const;  // NOLINT(google-explicit-constructor): declared only, never called
};

template <typename T, typename... Fields>
constexpr std::size_t CountFields() {
  if constexpr (requires { T{Fields{}..., AnyField{}}; }) {
    return CountFields<T, Fields..., AnyField>();
  } else {
    return sizeof...(Fields);
  }
}

std::size_t RowsIn(std::string_view section) {
  std::size_t n = 0;
  for (const KeySpec& key : ChannelKeys()) n += key.section() == section ? 1 : 0;
  return n;
}

TEST(KeyTableTest, HasOneRowPerChannelOptionsField) {
  // If one of these counts changes, a field was added or removed: add or remove its row in
  // lib/config/key_table.cc (and its line in config/nightjar.yaml), then update the count.
  EXPECT_EQ(CountFields<core::ChannelOptions>(), 22u);
  EXPECT_EQ(RowsIn(""), 22u - 10u);  // 10 members are sections (two alarm timings)
  EXPECT_EQ(CountFields<core::InputScalerOptions>(), RowsIn("scaler"));
  // input_size and seed are set by the engine, not the config.
  EXPECT_EQ(CountFields<core::LstmPredictorOptions>(), RowsIn("predictor") + 2);
  EXPECT_EQ(CountFields<core::ResidualMonitorOptions>(), RowsIn("residual"));
  EXPECT_EQ(CountFields<core::ThresholdOptions>(), RowsIn("thresholds"));
  EXPECT_EQ(CountFields<core::ResumeOptions>(), RowsIn("resume"));
  EXPECT_EQ(CountFields<core::ContextOptions>(), RowsIn("context"));
  EXPECT_EQ(CountFields<core::LevelOptions>(), RowsIn("level"));
  EXPECT_EQ(CountFields<core::SensorHealthOptions>(), RowsIn("sensor"));
  EXPECT_EQ(CountFields<core::AlarmTiming>(), RowsIn("anomaly_alarm"));
  EXPECT_EQ(CountFields<core::AlarmTiming>(), RowsIn("sensor_alarm"));
  EXPECT_EQ(ChannelKeys().size(), 62u);
  // One `events:` entry.
  EXPECT_EQ(CountFields<core::EventTemplate>(), EventTemplateKeys().size());
}

TEST(KeyTableTest, EveryEventKeyReachesItsOwnField) {
  core::EventTemplate e;
  std::set<const void*> addresses;
  for (const EventKeySpec& key : EventTemplateKeys()) {
    const void* address = std::visit([](auto* p) -> const void* { return p; }, key.field(e));
    EXPECT_TRUE(addresses.insert(address).second) << key.name << " shares a field";
    const auto* p = static_cast<const char*>(address);
    const auto* begin = reinterpret_cast<const char*>(&e);
    EXPECT_TRUE(p >= begin && p < begin + sizeof e) << key.name;
    EXPECT_EQ(FindEventKey(key.name), &key);
  }
  EXPECT_EQ(FindEventKey("shape")->type(), ValueType::kNumberList);
  EXPECT_EQ(std::get<int>(DefaultEventValue(*FindEventKey("band"))), -1);
}

TEST(KeyTableTest, EveryRowReachesItsOwnFieldInsideItsSection) {
  core::ChannelOptions o;
  struct Range {
    const void* begin;
    std::size_t size;
  };
  const std::map<std::string_view, Range> sections = {
      {"", {&o, sizeof o}},
      {"context", {&o.context, sizeof o.context}},
      {"scaler", {&o.scaler, sizeof o.scaler}},
      {"predictor", {&o.predictor, sizeof o.predictor}},
      {"residual", {&o.residual, sizeof o.residual}},
      {"thresholds", {&o.thresholds, sizeof o.thresholds}},
      {"level", {&o.level, sizeof o.level}},
      {"resume", {&o.resume, sizeof o.resume}},
      {"sensor", {&o.sensor, sizeof o.sensor}},
      {"anomaly_alarm", {&o.anomaly_alarm, sizeof o.anomaly_alarm}},
      {"sensor_alarm", {&o.sensor_alarm, sizeof o.sensor_alarm}},
  };
  std::set<const void*> addresses;
  for (const KeySpec& key : ChannelKeys()) {
    const void* address = std::visit([](auto* p) -> const void* { return p; }, key.field(o));
    EXPECT_TRUE(addresses.insert(address).second) << key.path << " shares a field";
    ASSERT_EQ(sections.count(key.section()), 1u) << key.path << ": unknown section";
    const Range r = sections.at(key.section());
    const auto* p = static_cast<const char*>(address);
    const auto* begin = static_cast<const char*>(r.begin);
    EXPECT_TRUE(p >= begin && p < begin + r.size) << key.path << " is outside its section";
  }
  // The engine-managed fields have no row.
  EXPECT_EQ(addresses.count(&o.predictor.input_size), 0u);
  EXPECT_EQ(addresses.count(&o.predictor.seed), 0u);
}

TEST(KeyTableTest, PathsAreSnakeCaseMirrorsOfTheFields) {
  const std::regex snake("[a-z][a-z0-9_]*(\\.[a-z][a-z0-9_]*)?");
  std::set<std::string_view> seen;
  for (const KeySpec& key : ChannelKeys()) {
    EXPECT_TRUE(std::regex_match(std::string(key.path), snake)) << key.path;
    EXPECT_TRUE(seen.insert(key.path).second) << "duplicate " << key.path;
    EXPECT_FALSE(key.doc.empty()) << key.path;
    EXPECT_EQ(FindKey(key.path), &key);
  }
  // Spot checks against the brief's names.
  for (const char* path : {"predictor.hidden_size", "thresholds.false_alarms_per_day",
                           "anomaly_alarm.on_delay_s", "sensor.min_value", "anomaly_priority"}) {
    EXPECT_NE(FindKey(path), nullptr) << path;
  }
  EXPECT_EQ(FindKey("predictor.input_size"), nullptr);
  EXPECT_EQ(FindKey("predictor.seed"), nullptr);
}

TEST(KeyTableTest, SetAndGetRoundTripThroughTheField) {
  core::ChannelOptions o;
  SetValue(*FindKey("predictor.hidden_size"), Value(64), o);
  EXPECT_EQ(o.predictor.hidden_size, 64);
  SetValue(*FindKey("sensor.max_value"), Value(200.0), o);
  EXPECT_EQ(o.sensor.max_value, 200.0);
  SetValue(*FindKey("unit"), Value(std::string("m3/h")), o);
  EXPECT_EQ(o.unit, "m3/h");
  SetValue(*FindKey("sensor_priority"), Value(core::Priority::kHigh), o);
  EXPECT_EQ(o.sensor_priority, core::Priority::kHigh);
  SetValue(*FindKey("residual.correct_autocorrelation"), Value(false), o);
  EXPECT_FALSE(o.residual.correct_autocorrelation);
  SetValue(*FindKey("forecaster"), Value(core::Forecaster::kLastValue), o);
  EXPECT_EQ(o.forecaster, core::Forecaster::kLastValue);
  core::EventTemplate event;
  SetEventValue(*FindEventKey("name"), Value(std::string("pump_start")), event);
  SetEventValue(*FindEventKey("shape"), Value(std::vector<double>{0, 5, 40, 35}), event);
  SetValue(*FindKey("events"), Value(std::vector<core::EventTemplate>{event}), o);
  ASSERT_EQ(o.events.size(), 1u);
  EXPECT_EQ(o.events[0].name, "pump_start");
  EXPECT_EQ(o.events[0].shape, (std::vector<double>{0, 5, 40, 35}));
  EXPECT_EQ(std::get<int>(GetValue(*FindKey("predictor.hidden_size"), o)), 64);
  EXPECT_EQ(std::get<int>(DefaultValue(*FindKey("predictor.hidden_size"))), 32);
}

TEST(KeyTableTest, FormatValueReadsBackExactly) {
  EXPECT_EQ(FormatValue(Value(1.0 / 512.0)), "0.001953125");
  EXPECT_EQ(FormatValue(Value(3e-5)), "3e-05");
  EXPECT_EQ(FormatValue(Value(std::numeric_limits<double>::infinity())), ".inf");
  EXPECT_EQ(FormatValue(Value(-std::numeric_limits<double>::infinity())), "-.inf");
  EXPECT_EQ(FormatValue(Value(std::string("a\"b"))), "\"a\\\"b\"");
  EXPECT_EQ(FormatValue(Value(core::Priority::kMedium)), "medium");
  EXPECT_EQ(FormatValue(Value(true)), "true");
  EXPECT_EQ(FormatValue(Value(1800)), "1800");
  EXPECT_EQ(FormatValue(Value(core::Forecaster::kLastValue)), "last_value");
  EXPECT_EQ(FormatValue(Value(std::vector<core::EventTemplate>{})), "[]");
  core::EventTemplate event;
  event.name = "a";
  event.shape = {1, 2.5};
  EXPECT_EQ(FormatValue(Value(std::vector<core::EventTemplate>{event})),
            "[{name: \"a\", shape: [1, 2.5], band: -1, max_distance: 0.5, min_spread_ratio: 0.5}]");
}

TEST(BoundsTest, DescribesIntervalsInWords) {
  const double inf = std::numeric_limits<double>::infinity();
  EXPECT_EQ((Bounds{1, 1024, false, false}).Describe(), "[1, 1024]");
  EXPECT_EQ((Bounds{0, 1, true, false}).Describe(), "(0, 1]");
  EXPECT_EQ((Bounds{0, inf, false, true}).Describe(), ">= 0");
  EXPECT_EQ((Bounds{0, inf, true, true}).Describe(), "> 0");
  EXPECT_EQ((Bounds{-inf, inf, true, true}).Describe(), "a finite number");
  EXPECT_FALSE((Bounds{-inf, inf, true, true}).Contains(inf));
  EXPECT_TRUE((Bounds{}).Contains(-inf));
  EXPECT_FALSE((Bounds{}).Contains(std::nan("")));
}

// Values at and just beyond each end of a key's bounds.
std::vector<double> EdgeProbes(const KeySpec& key) {
  const double inf = std::numeric_limits<double>::infinity();
  const bool is_int = key.type() == ValueType::kInt;
  std::vector<double> probes;
  for (const double end : {key.bounds.lo, key.bounds.hi}) {
    if (std::isinf(end)) {
      probes.push_back(end);
      continue;
    }
    const double outward = end == key.bounds.lo ? -inf : inf;
    probes.push_back(end);
    probes.push_back(is_int ? end + (outward > 0 ? 1 : -1) : std::nextafter(end, outward));
    probes.push_back(is_int ? end - (outward > 0 ? 1 : -1) : std::nextafter(end, -outward));
  }
  return probes;
}

// Moves the partner of a cross-field rule out of the way so that only `key`'s own bound is
// probed (the rules of core/engine_options.cc and LstmPredictor::Validate).
void IsolateKey(const KeySpec& key, core::ChannelOptions& o) {
  const std::string_view path = key.path;
  if (path == "predictor.hidden_size") o.predictor.window = 1;
  if (path == "predictor.window") o.predictor.hidden_size = 1;
  if (path == "warmup_samples") o.scaler.warmup_samples = 2;
  if (path == "scaler.warmup_samples") o.warmup_samples = std::numeric_limits<int>::max();
  if (path == "predictor.learning_rate") {
    o.predictor.final_learning_rate = std::numeric_limits<double>::denorm_min();
  }
  if (path == "predictor.final_learning_rate") {
    o.predictor.learning_rate = std::numeric_limits<double>::max();
  }
}

TEST(KeyTableTest, BoundsAgreeWithCoreValidation) {
  // Every value the table admits must pass core::ValidateChannelOptions (else the loader
  // would accept a file the engine rejects), and every value core rejects on its own must be
  // rejected by the table (so the error points at the key's line). The table is stricter
  // only where core lets an infinity through that no channel can use.
  const double inf = std::numeric_limits<double>::infinity();
  const std::set<std::pair<std::string, double>> table_stricter = {
      {"scaler.min_scale", inf},       {"residual.scale_floor", inf}, {"residual.scale_clip", inf},
      {"residual.cusum_cap", inf},     {"thresholds.cusum_h", inf},   {"thresholds.ewma_l", inf},
      {"thresholds.spike_limit", inf},
  };
  // A hole inside an interval (flatline_samples and chatter_raises are 0 or >= 2) is core's to
  // reject: the loader runs core on every block and points the error at the key's line.
  const std::set<std::pair<std::string, double>> core_stricter = {
      {"sensor.flatline_samples", 1},
      {"anomaly_alarm.chatter_raises", 1},
      {"sensor_alarm.chatter_raises", 1},
  };
  std::set<std::pair<std::string, double>> stricter_seen;
  for (const KeySpec& key : ChannelKeys()) {
    const ValueType type = key.type();
    if (type != ValueType::kInt && type != ValueType::kDouble) continue;
    for (const double probe : EdgeProbes(key)) {
      if (type == ValueType::kInt &&
          (std::isinf(probe) || probe > std::numeric_limits<int>::max() ||
           probe < std::numeric_limits<int>::min())) {
        continue;  // not an int: the parser rejects it before bounds
      }
      core::ChannelOptions o;
      IsolateKey(key, o);
      SetValue(key, type == ValueType::kInt ? Value(static_cast<int>(probe)) : Value(probe), o);
      const core::Status core_says = core::ValidateChannelOptions(o);
      const bool table_says = key.bounds.Contains(probe);
      if (table_says && core_stricter.count({std::string(key.path), probe}) == 1) {
        EXPECT_FALSE(core_says.ok()) << key.path << " = " << probe;
      } else if (table_says) {
        EXPECT_TRUE(core_says.ok())
            << key.path << " = " << probe << ": table admits it, core says " << core_says.message();
      } else if (core_says.ok()) {
        EXPECT_EQ(table_stricter.count({std::string(key.path), probe}), 1u)
            << key.path << " = " << probe << ": core accepts it, the table does not";
        stricter_seen.insert({std::string(key.path), probe});
      }
    }
  }
  EXPECT_EQ(stricter_seen, table_stricter) << "update the allow-list: core changed";
}

}  // namespace
}  // namespace nightjar::config

namespace nightjar::config {
namespace {

// A reload keeps a channel's learnt state only when its options are the same key for key
// (common practice: compare the settings an operator can write).
TEST(SameChannelOptionsTest, DetectsAChangeInAnyKey) {
  const core::ChannelOptions base;
  EXPECT_TRUE(SameChannelOptions(base, base));
  for (const KeySpec& key : ChannelKeys()) {
    core::ChannelOptions changed = base;
    const Value v = GetValue(key, base);
    Value other = v;
    if (const auto* s = std::get_if<std::string>(&v)) other = *s + "x";
    if (const auto* b = std::get_if<bool>(&v)) other = !*b;
    if (const auto* i = std::get_if<int>(&v)) other = *i + 1;
    if (const auto* d = std::get_if<double>(&v)) other = *d == 0.0 ? 1.0 : -*d;
    if (const auto* p = std::get_if<core::Priority>(&v))
      other = *p == core::Priority::kHigh ? core::Priority::kLow : core::Priority::kHigh;
    if (const auto* f = std::get_if<core::Forecaster>(&v))
      other =
          *f == core::Forecaster::kLstm ? core::Forecaster::kLastValue : core::Forecaster::kLstm;
    if (std::holds_alternative<std::vector<core::EventTemplate>>(v)) {
      core::EventTemplate event;
      event.name = "pump_start";
      other = std::vector<core::EventTemplate>{event};
    }
    SetValue(key, other, changed);
    EXPECT_FALSE(SameChannelOptions(base, changed)) << key.path;
  }
}

}  // namespace
}  // namespace nightjar::config
