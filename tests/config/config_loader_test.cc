// LoadConfigString / LoadConfigFile: the file layout of lib/config/config.h, override
// resolution and one-pass error collection with file, line, column and key path.
// Expected values are the documented behaviour (config.h, key_table.h); YAML semantics are
// those of the YAML 1.2 core schema (yaml.org/spec/1.2.2, §10.3).
#include <gtest/gtest.h>

#include <cmath>
#include <filesystem>
#include <fstream>
#include <limits>
#include <string>
#include <vector>

#include "config/config.h"

namespace nightjar::config {
namespace {

LoadResult Load(std::string_view yaml) { return LoadConfigString(yaml, "test.yaml"); }

std::string AllErrors(const LoadResult& r) {
  std::string out;
  for (const ConfigError& e : r.errors) out += e.ToString() + "\n";
  return out;
}

// The one error of a load that must have exactly one.
ConfigError OnlyError(const LoadResult& r) {
  EXPECT_EQ(r.errors.size(), 1u) << AllErrors(r);
  return r.errors.empty() ? ConfigError{} : r.errors.front();
}

TEST(LoadConfigTest, EmptyFileAndMissingSectionsMeanDefaults) {
  for (const char* yaml :
       {"", "# nothing but a comment\n", "engine:\ndefaults:\nchannels:\n",
        "defaults: {}\nchannels: []\n", "defaults:\n  sensor:\n  predictor:\n"}) {
    const LoadResult r = Load(yaml);
    ASSERT_TRUE(r.ok()) << "'" << yaml << "'\n" << AllErrors(r);
    ASSERT_TRUE(r.config.has_value());
    EXPECT_EQ(r.config->engine.seed, 1u);
    EXPECT_TRUE(r.config->overrides.empty());
    const core::ChannelOptions o = r.config->Resolve("any.channel");
    EXPECT_EQ(o.warmup_samples, core::ChannelOptions{}.warmup_samples);
    EXPECT_EQ(o.predictor.hidden_size, core::ChannelOptions{}.predictor.hidden_size);
  }
}

TEST(LoadConfigTest, ReadsEngineDefaultsAndTypedValues) {
  const LoadResult r = Load(R"(
engine:
  seed: 18446744073709551615
defaults:
  unit: "m3/h"
  sample_period_s: 0.5
  warmup_samples: 3600
  time_of_day_features: false
  predictor: { hidden_size: 16, learning_rate: 2e-3 }
  sensor:
    min_value: -.inf
    max_value: 1.5e3
  anomaly_priority: high
  sensor_priority: "medium"
)");
  ASSERT_TRUE(r.ok()) << AllErrors(r);
  EXPECT_EQ(r.config->engine.seed, std::numeric_limits<std::uint64_t>::max());
  const core::ChannelOptions& d = r.config->engine.defaults;
  EXPECT_EQ(d.unit, "m3/h");
  EXPECT_EQ(d.sample_period_s, 0.5);
  EXPECT_EQ(d.warmup_samples, 3600);
  EXPECT_FALSE(d.time_of_day_features);
  EXPECT_EQ(d.predictor.hidden_size, 16);
  EXPECT_EQ(d.predictor.learning_rate, 2e-3);
  EXPECT_EQ(d.predictor.window, 32);  // untouched keys keep their built-in default
  EXPECT_EQ(d.sensor.min_value, -std::numeric_limits<double>::infinity());
  EXPECT_EQ(d.sensor.max_value, 1500.0);
  EXPECT_EQ(d.anomaly_priority, core::Priority::kHigh);
  EXPECT_EQ(d.sensor_priority, core::Priority::kMedium);
}

TEST(LoadConfigTest, LaterMatchingBlocksOverrideEarlierOnesKeyByKey) {
  const LoadResult r = Load(R"(
defaults:
  unit: "?"
  thresholds: { false_alarms_per_day: 0.5 }
channels:
  - match: "cw2.pump_a.*"
    unit: "m3/h"
    sensor: { min_value: 0, max_value: 200 }
  - match: "cw2.pump_a.bearing_temp"
    unit: "degC"
    sensor: { max_value: 150 }
  - match: "cw2.**"
    thresholds: { false_alarms_per_day: 1 }
)");
  ASSERT_TRUE(r.ok()) << AllErrors(r);
  ASSERT_EQ(r.config->overrides.size(), 3u);
  EXPECT_EQ(r.config->overrides[0].match, "cw2.pump_a.*");
  EXPECT_EQ(r.config->overrides[0].line, 6);

  const core::ChannelOptions flow = r.config->Resolve("cw2.pump_a.flow");
  EXPECT_EQ(flow.unit, "m3/h");
  EXPECT_EQ(flow.sensor.min_value, 0.0);
  EXPECT_EQ(flow.sensor.max_value, 200.0);
  EXPECT_EQ(flow.thresholds.false_alarms_per_day, 1.0);

  const core::ChannelOptions temp = r.config->Resolve("cw2.pump_a.bearing_temp");
  EXPECT_EQ(temp.unit, "degC");
  EXPECT_EQ(temp.sensor.min_value, 0.0);  // from the first block: only max_value overridden
  EXPECT_EQ(temp.sensor.max_value, 150.0);

  const core::ChannelOptions level = r.config->Resolve("cw2.tank.level");
  EXPECT_EQ(level.unit, "?");
  EXPECT_EQ(level.sensor.max_value, std::numeric_limits<double>::infinity());
  EXPECT_EQ(level.thresholds.false_alarms_per_day, 1.0);

  const core::ChannelOptions other = r.config->Resolve("cw3.x");
  EXPECT_EQ(other.unit, "?");
  EXPECT_EQ(other.thresholds.false_alarms_per_day, 0.5);
}

TEST(LoadConfigTest, ResolverOutlivesTheConfig) {
  core::ChannelOptionsResolver resolver;
  {
    const LoadResult r = Load("channels:\n  - match: \"a.*\"\n    unit: \"bar\"\n");
    ASSERT_TRUE(r.ok()) << AllErrors(r);
    resolver = r.config->Resolver();
  }
  EXPECT_EQ(resolver("a.b").unit, "bar");
  EXPECT_EQ(resolver("b.a").unit, "");
}

TEST(LoadConfigTest, UnknownKeyNamesFullPathPositionAndSuggestion) {
  const LoadResult r = Load(R"(channels:
  - match: "cw2.*"
    sensor: { min_value: 0, max_valeu: 200 }
)");
  const ConfigError e = OnlyError(r);
  EXPECT_FALSE(r.config.has_value());
  EXPECT_EQ(e.file, "test.yaml");
  EXPECT_EQ(e.line, 3);
  EXPECT_EQ(e.column, 29);
  EXPECT_EQ(e.key_path, "channels[0].sensor.max_valeu");
  EXPECT_EQ(e.message, "unknown key; did you mean 'max_value'?");
  EXPECT_EQ(e.ToString(),
            "test.yaml:3:29: channels[0].sensor.max_valeu: unknown key; did you mean 'max_value'?");
}

TEST(LoadConfigTest, SuggestionsOnlyWhenOneKeyIsClose) {
  EXPECT_EQ(OnlyError(Load("defaults:\n  warmup_sample: 5\n")).message,
            "unknown key; did you mean 'warmup_samples'?");
  EXPECT_EQ(OnlyError(Load("defaults:\n  thresholds: {cusum_kk: 1}\n")).message,
            "unknown key; did you mean 'cusum_k'?");
  EXPECT_EQ(OnlyError(Load("defaults:\n  predicter: {}\n")).message,
            "unknown key; did you mean 'predictor'?");
  // Nothing within distance 2.
  EXPECT_EQ(OnlyError(Load("defaults:\n  sensor: {colour: 1}\n")).message,
            "unknown key in 'sensor:'");
  // cusum_x is 1 from both cusum_k and cusum_h: no single suggestion.
  EXPECT_EQ(OnlyError(Load("defaults:\n  thresholds: {cusum_x: 1}\n")).message,
            "unknown key in 'thresholds:'");
  // Right name, wrong level.
  EXPECT_EQ(OnlyError(Load("defaults:\n  max_value: 1\n")).message,
            "unknown key; did you mean 'sensor.max_value' (under 'sensor:')?");
  EXPECT_EQ(OnlyError(Load("engine:\n  sead: 1\n")).message, "unknown key; did you mean 'seed'?");
  EXPECT_EQ(OnlyError(Load("default:\n  unit: x\n")).message,
            "unknown top-level section; did you mean 'defaults'?");
}

TEST(LoadConfigTest, DottedKeysAreRejectedWithTheNestedForm) {
  const ConfigError e = OnlyError(Load("defaults:\n  sensor.min_value: 0\n"));
  EXPECT_EQ(e.key_path, "defaults.sensor.min_value");
  EXPECT_EQ(e.message,
            "unknown key; dotted keys are not supported, nest it: 'sensor: { min_value: ... }'");
}

TEST(LoadConfigTest, WrongTypesAreReportedAtTheValue) {
  struct Case {
    const char* yaml;
    const char* key_path;
    const char* message;
    int line = 2;
  };
  const Case cases[] = {
      {"defaults:\n  warmup_samples: 1.5\n", "defaults.warmup_samples",
       "expected an integer, got '1.5'"},
      {"defaults:\n  warmup_samples: 0x10\n", "defaults.warmup_samples",
       "expected an integer, got '0x10'"},
      {"defaults:\n  sample_period_s: fast\n", "defaults.sample_period_s",
       "expected a number, got 'fast'"},
      {"defaults:\n  sample_period_s: \"1\"\n", "defaults.sample_period_s",
       "expected a number, got the string \"1\" (remove the quotes)"},
      {"defaults:\n  sample_period_s: .nan\n", "defaults.sample_period_s", "NaN is not allowed"},
      {"defaults:\n  sample_period_s: 1e999\n", "defaults.sample_period_s",
       "'1e999' is out of the range of a double"},
      {"defaults:\n  sample_period_s: inf\n", "defaults.sample_period_s",
       "expected a number, got 'inf'"},
      {"defaults:\n  time_of_day_features: yes\n", "defaults.time_of_day_features",
       "expected true or false, got 'yes'"},
      {"defaults:\n  anomaly_priority: urgent\n", "defaults.anomaly_priority",
       "expected one of low, medium, high, got 'urgent'"},
      {"defaults:\n  unit: [m3, h]\n", "defaults.unit", "expected a string, got a sequence"},
      {"defaults:\n  sensor: 5\n", "defaults.sensor", "expected a mapping of keys, got a scalar"},
      {"defaults:\n  warmup_samples:\n", "defaults.warmup_samples",
       "missing value: expected an integer"},
      {"defaults:\n  warmup_samples: 99999999999\n", "defaults.warmup_samples",
       "'99999999999' is out of the integer range"},
      {"engine:\n  seed: -1\n", "engine.seed", "expected an integer in [0, 2^64), got '-1'"},
      {"defaults: [1, 2]\n", "defaults", "expected a mapping of keys, got a sequence", 1},
      {"channels: {match: x}\n", "channels",
       "expected a sequence of override blocks (- match: ...), got a mapping", 1},
      {"defaults:\n  forecaster: arima\n", "defaults.forecaster",
       "expected one of lstm, last_value, got 'arima'"},
      {"channels:\n  - 5\n", "channels[0]",
       "expected a mapping with 'match' and keys, got a scalar"},
  };
  for (const Case& c : cases) {
    const ConfigError e = OnlyError(Load(c.yaml));
    EXPECT_EQ(e.key_path, c.key_path) << c.yaml;
    EXPECT_EQ(e.message, c.message) << c.yaml;
    EXPECT_EQ(e.line, c.line) << c.yaml << e.ToString();
  }
}

TEST(LoadConfigTest, OutOfBoundsValuesNameTheRange) {
  const LoadResult r = Load(R"(defaults:
  predictor:
    hidden_size: 2048
  scaler: { adapt_alpha: 1 }
  thresholds: { false_alarms_per_day: 0 }
  anomaly_alarm: { on_delay_s: 90000 }
  sensor: { gap_periods: .inf }
)");
  ASSERT_EQ(r.errors.size(), 5u) << AllErrors(r);
  EXPECT_EQ(r.errors[0].ToString(),
            "test.yaml:3:18: defaults.predictor.hidden_size: must be in [1, 1024], got 2048");
  EXPECT_EQ(r.errors[1].ToString(),
            "test.yaml:4:26: defaults.scaler.adapt_alpha: must be in [0, 1), got 1");
  EXPECT_EQ(r.errors[2].ToString(),
            "test.yaml:5:39: defaults.thresholds.false_alarms_per_day: must be > 0, got 0");
  EXPECT_EQ(r.errors[3].ToString(),
            "test.yaml:6:32: defaults.anomaly_alarm.on_delay_s: must be in [0, 86400], got 90000");
  EXPECT_EQ(r.errors[4].ToString(),
            "test.yaml:7:26: defaults.sensor.gap_periods: must be > 1, got .inf");
}

TEST(LoadConfigTest, CrossFieldRulesAreCheckedOnEachResolvedBlock) {
  const LoadResult r = Load(R"(defaults:
  scaler: { warmup_samples: 600 }
channels:
  - match: "a.*"
    sensor: { min_value: 300, max_value: 200 }
  - match: "b.*"
    warmup_samples: 100
    predictor:
      hidden_size: 512
      window: 64
  - match: "c.*"
    predictor: { learning_rate: 1e-6 }
)");
  ASSERT_EQ(r.errors.size(), 4u) << AllErrors(r);
  EXPECT_EQ(r.errors[0].key_path, "channels[0].sensor.max_value");
  EXPECT_EQ(r.errors[0].line, 5);
  EXPECT_EQ(r.errors[0].column, 42);
  EXPECT_NE(r.errors[0].message.find("need min_value <= max_value"), std::string::npos);
  // Both errors of block 1 are found although core stops at its first.
  EXPECT_EQ(r.errors[1].ToString(),
            "test.yaml:7:21: channels[1].warmup_samples: must be >= scaler.warmup_samples (600)");
  EXPECT_EQ(r.errors[2].ToString(),
            "test.yaml:10:15: channels[1].predictor.window: "
            "predictor.hidden_size * predictor.window: must be <= 8192");
  // The rule is about final_learning_rate, which block 2 did not set: the error points at
  // the key it did set and keeps the rule's own key in the message.
  EXPECT_EQ(r.errors[3].ToString(),
            "test.yaml:12:33: channels[2].predictor.learning_rate: "
            "predictor.final_learning_rate: must be > 0 and <= predictor.learning_rate");
}

TEST(LoadConfigTest, AnErrorInTheDefaultsIsReportedOnceNotPerBlock) {
  const LoadResult r = Load(R"(defaults:
  warmup_samples: 100
channels:
  - match: "a.*"
    unit: "x"
  - match: "b.*"
    unit: "y"
  - match: "c.*"
    warmup_samples: 50
    scaler: { warmup_samples: 60 }
)");
  ASSERT_EQ(r.errors.size(), 2u) << AllErrors(r);
  EXPECT_EQ(r.errors[0].ToString(),
            "test.yaml:2:19: defaults.warmup_samples: must be >= scaler.warmup_samples (120)");
  EXPECT_EQ(r.errors[1].ToString(),
            "test.yaml:9:21: channels[2].warmup_samples: must be >= scaler.warmup_samples (60)");
}

TEST(LoadConfigTest, GlobsAndMatchAreChecked) {
  const LoadResult r = Load(R"(channels:
  - match: "cw2..flow"
  - unit: "x"
  - match: ""
  - match: [a]
)");
  ASSERT_EQ(r.errors.size(), 4u) << AllErrors(r);
  EXPECT_EQ(r.errors[0].ToString(),
            "test.yaml:2:12: channels[0].match: bad glob \"cw2..flow\": empty level (leading, "
            "trailing or doubled '.')");
  EXPECT_EQ(r.errors[1].ToString(),
            "test.yaml:3:5: channels[1].match: missing: every block needs a glob");
  EXPECT_EQ(r.errors[2].ToString(),
            "test.yaml:4:12: channels[2].match: bad glob \"\": empty pattern");
  EXPECT_EQ(r.errors[3].key_path, "channels[3].match");
}

TEST(LoadConfigTest, ReadsEventTemplates) {
  const LoadResult r = Load(R"(defaults:
  event_priority: medium
channels:
  - match: "cw2.pump_a.motor_current"
    events:
      - name: "pump_start"
        shape: [0, 247, 120, 35, 30]
        band: 2
      - { name: "stop", shape: [30, 20, 5, 0], max_distance: 0.3, min_spread_ratio: 0.25 }
)");
  ASSERT_TRUE(r.ok()) << AllErrors(r);
  const core::ChannelOptions o = r.config->Resolve("cw2.pump_a.motor_current");
  ASSERT_EQ(o.events.size(), 2u);
  EXPECT_EQ(o.events[0].name, "pump_start");
  EXPECT_EQ(o.events[0].shape, (std::vector<double>{0, 247, 120, 35, 30}));
  EXPECT_EQ(o.events[0].band, 2);
  EXPECT_EQ(o.events[0].max_distance, 0.5);  // default
  EXPECT_EQ(o.events[1].max_distance, 0.3);
  EXPECT_EQ(o.events[1].min_spread_ratio, 0.25);
  EXPECT_EQ(o.event_priority, core::Priority::kMedium);
  EXPECT_TRUE(r.config->Resolve("cw2.pump_a.flow").events.empty());
}

TEST(LoadConfigTest, EventTemplateErrorsNameTheEntryAndKey) {
  const LoadResult r = Load(R"(defaults:
  events:
    - name: pump_start
      shape: [0, 5, x, 35]
      bnad: 3
    - {name: flat, shape: [1, 1, 1, 1]}
    - {shape: [1, 2, 3, 4], max_distance: 3}
    - {name: ok, shape: [1, 2, 3, 4], band: 9}
channels:
  - match: "**"
    events:
)");
  ASSERT_EQ(r.errors.size(), 7u) << AllErrors(r);
  EXPECT_EQ(r.errors[0].ToString(),
            "test.yaml:4:21: defaults.events[0].shape[2]: expected a number, got 'x'");
  EXPECT_EQ(r.errors[1].ToString(),
            "test.yaml:5:7: defaults.events[0].bnad: unknown key; did you mean 'band'?");
  EXPECT_EQ(r.errors[2].ToString(),
            "test.yaml:6:27: defaults.events[1].shape: a flat shape cannot be matched by its form");
  EXPECT_EQ(r.errors[3].ToString(),
            "test.yaml:7:7: defaults.events[2].name: missing: every event needs it");
  EXPECT_EQ(r.errors[4].ToString(),
            "test.yaml:7:43: defaults.events[2].max_distance: must be in (0, 2), got 3");
  EXPECT_EQ(r.errors[5].ToString(),
            "test.yaml:8:45: defaults.events[3].band: must be shorter than the shape");
  EXPECT_EQ(r.errors[6].ToString(),
            "test.yaml:11:5: channels[0].events: missing value: expected a list of event "
            "templates (- name: ..., shape: [...]); [] for none");
}

TEST(LoadConfigTest, DuplicateKeysAreErrors) {
  const LoadResult r = Load("defaults:\n  unit: a\n  unit: b\n  sensor: {}\n  sensor: {}\n");
  ASSERT_EQ(r.errors.size(), 2u) << AllErrors(r);
  EXPECT_EQ(r.errors[0].ToString(),
            "test.yaml:3:3: defaults.unit: duplicate key (first set on line 2)");
  EXPECT_EQ(r.errors[1].ToString(),
            "test.yaml:5:3: defaults.sensor: duplicate key (first set on line 4)");
}

TEST(LoadConfigTest, UnknownTopLevelSections) {
  const LoadResult r = Load("mqtt:\n  host: x\ndaemon: {}\nlogging: {}\nmqt: {}\n");
  ASSERT_EQ(r.errors.size(), 2u) << AllErrors(r);
  EXPECT_EQ(r.errors[0].ToString(),
            "test.yaml:4:1: logging: unknown top-level section (expected engine, defaults, "
            "channels, mqtt or daemon)");
  EXPECT_EQ(r.errors[1].ToString(),
            "test.yaml:5:1: mqt: unknown top-level section; did you mean 'mqtt'?");
  EXPECT_EQ(OnlyError(Load("- a\n- b\n")).message,
            "expected a mapping with engine:, defaults: and channels:, got a sequence");
}

TEST(LoadConfigTest, YamlSyntaxErrorsKeepTheirPosition) {
  const ConfigError e = OnlyError(Load("defaults:\n  unit: [m3,\n"));
  EXPECT_EQ(e.file, "test.yaml");
  EXPECT_EQ(e.line, 3);
  EXPECT_GE(e.column, 1);
  EXPECT_TRUE(e.key_path.empty());
  EXPECT_FALSE(e.message.empty());
  EXPECT_EQ(e.ToString().rfind("test.yaml:3:", 0), 0u) << e.ToString();

  const ConfigError tab = OnlyError(Load("defaults:\n\tunit: x\n"));
  EXPECT_EQ(tab.line, 2) << tab.ToString();

  const ConfigError docs = OnlyError(Load("defaults: {}\n---\nchannels: []\n"));
  EXPECT_EQ(docs.message, "only one YAML document per file (found 2)");
  EXPECT_EQ(docs.line, 3);
}

TEST(LoadConfigTest, CollectsEveryErrorInOnePassInFileOrder) {
  const LoadResult r = Load(R"(engine:
  seed: x
defaults:
  warmup_sample: 1
  predictor: { window: 0 }
channels:
  - match: "a.**"
    sensor: { max_valeu: 1, flatline_samples: 1 }
    sensor_priority: urgent
mqtt: { keepalive: 5 }
)");
  ASSERT_EQ(r.errors.size(), 7u) << AllErrors(r);
  std::vector<std::string> paths;
  for (const ConfigError& e : r.errors) paths.push_back(e.key_path);
  EXPECT_EQ(paths, (std::vector<std::string>{
                       "engine.seed", "defaults.warmup_sample", "defaults.predictor.window",
                       "channels[0].sensor.max_valeu", "channels[0].sensor.flatline_samples",
                       "channels[0].sensor_priority", "mqtt.keepalive"}));
  for (std::size_t i = 1; i < r.errors.size(); ++i) {
    EXPECT_LE(r.errors[i - 1].line, r.errors[i].line);
  }
}

TEST(LoadConfigTest, ToStringLeavesOutWhatIsUnknown) {
  EXPECT_EQ((ConfigError{"f.yaml", 0, 0, "", "cannot open: No such file or directory"}).ToString(),
            "f.yaml: cannot open: No such file or directory");
  EXPECT_EQ((ConfigError{"f.yaml", 2, 5, "", "bad"}).ToString(), "f.yaml:2:5: bad");
  EXPECT_EQ((ConfigError{"f.yaml", 2, 5, "defaults.unit", "bad"}).ToString(),
            "f.yaml:2:5: defaults.unit: bad");
}

TEST(LoadConfigFileTest, ReadsAFileAndNamesItInErrors) {
  const std::filesystem::path dir = ::testing::TempDir();
  const std::filesystem::path path = dir / "nightjar_config_loader_test.yaml";
  {
    std::ofstream out(path);
    out << "defaults:\n  unit: \"bar\"\n  sensor: {max_value: -1, min_value: 0}\n";
  }
  const LoadResult r = LoadConfigFile(path.string());
  const ConfigError e = OnlyError(r);
  EXPECT_EQ(e.file, path.string());
  EXPECT_EQ(e.line, 3);
  EXPECT_EQ(e.key_path, "defaults.sensor.min_value");
  std::filesystem::remove(path);

  const LoadResult missing = LoadConfigFile((dir / "no_such_nightjar.yaml").string());
  const ConfigError m = OnlyError(missing);
  EXPECT_EQ(m.line, 0);
  EXPECT_NE(m.message.find("cannot open"), std::string::npos);

  EXPECT_NE(OnlyError(LoadConfigFile(dir.string())).message.find("directory"), std::string::npos);
}

}  // namespace
}  // namespace nightjar::config
