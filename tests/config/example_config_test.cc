// config/nightjar.yaml and RenderReferenceYaml(): both load cleanly, the reference yields
// exactly core::ChannelOptions{}, and the example lists every key of the key table with its
// true default and unit, so the documented file cannot fall behind the code.
#include <gtest/gtest.h>

#include <fstream>
#include <map>
#include <regex>
#include <sstream>
#include <string>
#include <vector>

#include "config/config.h"
#include "config/service_config.h"

namespace nightjar::config {
namespace {

const std::string kExamplePath = std::string(NIGHTJAR_SOURCE_DIR) + "/config/nightjar.yaml";

std::string AllErrors(const LoadResult& r) {
  std::string out;
  for (const ConfigError& e : r.errors) out += e.ToString() + "\n";
  return out;
}

std::string ReadFile(const std::string& path) {
  std::ifstream in(path);
  EXPECT_TRUE(in.good()) << path;
  std::ostringstream text;
  text << in.rdbuf();
  return text.str();
}

// Field by field, written out by hand so that it does not lean on the key table it checks
// (key_table_test counts the fields, so a new one fails there first).
void ExpectSameOptions(const core::ChannelOptions& a, const core::ChannelOptions& b) {
  EXPECT_EQ(a.unit, b.unit);
  EXPECT_EQ(a.sample_period_s, b.sample_period_s);
  EXPECT_EQ(a.warmup_samples, b.warmup_samples);
  EXPECT_EQ(a.time_of_day_features, b.time_of_day_features);
  EXPECT_EQ(a.forecaster, b.forecaster);

  EXPECT_EQ(a.scaler.warmup_samples, b.scaler.warmup_samples);
  EXPECT_EQ(a.scaler.adapt_alpha, b.scaler.adapt_alpha);
  EXPECT_EQ(a.scaler.min_scale, b.scaler.min_scale);

  EXPECT_EQ(a.predictor.input_size, b.predictor.input_size);
  EXPECT_EQ(a.predictor.hidden_size, b.predictor.hidden_size);
  EXPECT_EQ(a.predictor.window, b.predictor.window);
  EXPECT_EQ(a.predictor.train_every, b.predictor.train_every);
  EXPECT_EQ(a.predictor.learning_rate, b.predictor.learning_rate);
  EXPECT_EQ(a.predictor.final_learning_rate, b.predictor.final_learning_rate);
  EXPECT_EQ(a.predictor.learning_rate_decay_steps, b.predictor.learning_rate_decay_steps);
  EXPECT_EQ(a.predictor.gradient_clip_norm, b.predictor.gradient_clip_norm);
  EXPECT_EQ(a.predictor.forget_bias, b.predictor.forget_bias);
  EXPECT_EQ(a.predictor.seed, b.predictor.seed);

  EXPECT_EQ(a.residual.scale_alpha, b.residual.scale_alpha);
  EXPECT_EQ(a.residual.scale_floor, b.residual.scale_floor);
  EXPECT_EQ(a.residual.scale_clip, b.residual.scale_clip);
  EXPECT_EQ(a.residual.autocorrelation_alpha, b.residual.autocorrelation_alpha);
  EXPECT_EQ(a.residual.correct_autocorrelation, b.residual.correct_autocorrelation);
  EXPECT_EQ(a.residual.cusum_cap, b.residual.cusum_cap);

  EXPECT_EQ(a.thresholds.false_alarms_per_day, b.thresholds.false_alarms_per_day);
  EXPECT_EQ(a.thresholds.cusum_k, b.thresholds.cusum_k);
  EXPECT_EQ(a.thresholds.cusum_h, b.thresholds.cusum_h);
  EXPECT_EQ(a.thresholds.ewma_lambda, b.thresholds.ewma_lambda);
  EXPECT_EQ(a.thresholds.ewma_l, b.thresholds.ewma_l);
  EXPECT_EQ(a.thresholds.spike_limit, b.thresholds.spike_limit);

  EXPECT_EQ(a.sensor.min_value, b.sensor.min_value);
  EXPECT_EQ(a.sensor.max_value, b.sensor.max_value);
  EXPECT_EQ(a.sensor.flatline_samples, b.sensor.flatline_samples);
  EXPECT_EQ(a.sensor.flatline_tolerance, b.sensor.flatline_tolerance);
  EXPECT_EQ(a.sensor.gap_periods, b.sensor.gap_periods);

  for (const auto& [x, y] :
       {std::pair(a.anomaly_alarm, b.anomaly_alarm), std::pair(a.sensor_alarm, b.sensor_alarm)}) {
    EXPECT_EQ(x.on_delay_s, y.on_delay_s);
    EXPECT_EQ(x.off_delay_s, y.off_delay_s);
    EXPECT_EQ(x.deadband, y.deadband);
    EXPECT_EQ(x.max_shelve_s, y.max_shelve_s);
  }
  ASSERT_EQ(a.events.size(), b.events.size());
  for (std::size_t i = 0; i < a.events.size(); ++i) {
    EXPECT_EQ(a.events[i].name, b.events[i].name);
    EXPECT_EQ(a.events[i].shape, b.events[i].shape);
    EXPECT_EQ(a.events[i].band, b.events[i].band);
    EXPECT_EQ(a.events[i].max_distance, b.events[i].max_distance);
    EXPECT_EQ(a.events[i].min_spread_ratio, b.events[i].min_spread_ratio);
  }
  EXPECT_EQ(a.event_priority, b.event_priority);
  EXPECT_EQ(a.anomaly_priority, b.anomaly_priority);
  EXPECT_EQ(a.sensor_priority, b.sensor_priority);
}

TEST(ReferenceYamlTest, LoadsCleanlyAndYieldsTheBuiltInDefaults) {
  const std::string yaml = RenderReferenceYaml();
  const LoadResult r = LoadConfigString(yaml, "reference.yaml");
  ASSERT_TRUE(r.ok()) << AllErrors(r) << yaml;
  EXPECT_EQ(r.config->engine.seed, core::EngineOptions{}.seed);
  EXPECT_TRUE(r.config->overrides.empty());
  ExpectSameOptions(r.config->engine.defaults, core::ChannelOptions{});
  ExpectSameOptions(r.config->Resolve("cw2.pump_a.flow"), core::ChannelOptions{});
}

TEST(ReferenceYamlTest, ListsEveryKeyWithUnitAndRange) {
  const std::string yaml = RenderReferenceYaml();
  for (const KeySpec& key : ChannelKeys()) {
    const std::string line =
        std::string(key.name()) + ": " + FormatValue(DefaultValue(key)) + "  # ";
    EXPECT_NE(yaml.find(line), std::string::npos) << key.path;
    if (!key.unit.empty()) {
      EXPECT_NE(yaml.find(line + std::string("[").append(key.unit).append("]")), std::string::npos)
          << key.path;
    }
  }
}

TEST(ReferenceYamlTest, ListsTheKeysOfAnEventEntry) {
  const std::string yaml = RenderReferenceYaml();
  for (const EventKeySpec& key : EventTemplateKeys()) {
    const std::string line =
        std::string("  #   ") + std::string(key.name) + ": " +
        (key.required ? std::string("(required)") : FormatValue(DefaultEventValue(key)));
    EXPECT_NE(yaml.find(line), std::string::npos) << key.name;
  }
}

TEST(ExampleConfigTest, LoadsWithZeroErrors) {
  const LoadResult r = LoadConfigFile(kExamplePath);
  ASSERT_TRUE(r.ok()) << AllErrors(r);
  // The five CW2 channels of the demo day (replay_data/FORMAT.md) get their units, spans and
  // the 1 s sample period.
  const std::map<std::string, std::tuple<std::string, double, double>> expected = {
      {"cw2.pump_a.flow", {"m3/h", 0, 200}},
      {"cw2.pump_a.discharge_pressure", {"bar(g)", 0, 10}},
      {"cw2.pump_a.motor_current", {"A", 0, 300}},
      {"cw2.pump_a.bearing_temp", {"degC", -20, 150}},
      {"cw2.tank.level", {"%", 0, 100}},
  };
  for (const auto& [channel, want] : expected) {
    const core::ChannelOptions o = r.config->Resolve(channel);
    EXPECT_EQ(o.unit, std::get<0>(want)) << channel;
    EXPECT_EQ(o.sensor.min_value, std::get<1>(want)) << channel;
    EXPECT_EQ(o.sensor.max_value, std::get<2>(want)) << channel;
    EXPECT_EQ(o.sample_period_s, 1.0) << channel;
    EXPECT_TRUE(core::ValidateChannelOptions(o).ok()) << channel;
  }
  EXPECT_EQ(r.config->Resolve("cw2.pump_a.bearing_temp").anomaly_priority, core::Priority::kHigh);
}

// One key line found under `defaults:` in the example, commented out or not.
struct DocumentedKey {
  int line = 0;
  bool commented = false;
  std::string value;
  std::string comment;
};

// Walks the `defaults:` section by indentation, reading both `key: value` and
// `# key: value` lines (prose comments start with a capital letter and are skipped).
std::map<std::string, DocumentedKey> DocumentedDefaults(const std::string& text) {
  static const std::regex key_line(R"(([a-z_]+):(?: +(.*?))?(?:  +# (.*))?)");
  std::map<std::string, DocumentedKey> keys;
  std::vector<std::pair<std::size_t, std::string>> sections;  // (indent, name)
  bool in_defaults = false;
  std::istringstream in(text);
  std::string line;
  for (int number = 1; std::getline(in, line); ++number) {
    const std::size_t indent = line.find_first_not_of(' ');
    if (indent == std::string::npos) continue;
    if (indent == 0) {
      if (line[0] != '#') in_defaults = line.rfind("defaults:", 0) == 0;
      continue;
    }
    if (!in_defaults) continue;
    std::string rest = line.substr(indent);
    const bool commented = rest.rfind("# ", 0) == 0;
    if (commented) rest.erase(0, 2);
    std::smatch m;
    if (!std::regex_match(rest, m, key_line)) continue;
    while (!sections.empty() && sections.back().first >= indent) sections.pop_back();
    std::string path;
    for (const auto& s : sections) path += s.second + ".";
    path += m[1].str();
    if (m[2].str().empty()) {
      sections.emplace_back(indent, m[1].str());
      continue;
    }
    EXPECT_EQ(keys.count(path), 0u)
        << "config/nightjar.yaml:" << number << ": " << path << " listed twice";
    keys[path] = DocumentedKey{number, commented, m[2].str(), m[3].str()};
  }
  return keys;
}

TEST(ExampleConfigTest, ListsEveryKeyWithItsDefaultAndUnit) {
  const std::map<std::string, DocumentedKey> documented =
      DocumentedDefaults(ReadFile(kExamplePath));
  for (const KeySpec& key : ChannelKeys()) {
    const auto it = documented.find(std::string(key.path));
    if (it == documented.end()) {
      ADD_FAILURE() << key.path << " is not listed under defaults: in config/nightjar.yaml";
      continue;
    }
    const DocumentedKey& d = it->second;
    const std::string where = std::string("config/nightjar.yaml:") + std::to_string(d.line) + ": " +
                              std::string(key.path);
    const std::string default_text = FormatValue(DefaultValue(key));
    if (d.commented) {
      EXPECT_EQ(d.value, default_text) << where << ": a commented-out key shows the default";
    } else if (d.value != default_text) {
      EXPECT_NE(d.comment.find(std::string("default ") + default_text), std::string::npos)
          << where << ": a key set to another value names the default in its comment";
    }
    if (!key.unit.empty()) {
      EXPECT_NE(d.comment.find(std::string("[").append(key.unit).append("]")), std::string::npos)
          << where << ": the comment names the unit [" << key.unit << "]";
    }
  }
  // The keys of one events: entry, from the commented example entry.
  const std::string text = ReadFile(kExamplePath);
  for (const EventKeySpec& key : EventTemplateKeys()) {
    const std::regex entry_line("\\n *# +(- )?" + std::string(key.name) + ": ([^\\n]*)");
    std::smatch m;
    if (!std::regex_search(text, m, entry_line)) {
      ADD_FAILURE() << "events entry key " << key.name << " is not in config/nightjar.yaml";
      continue;
    }
    const std::string rest = m[2].str();
    if (!key.unit.empty()) {
      EXPECT_NE(rest.find(std::string("[").append(key.unit).append("]")), std::string::npos)
          << key.name << ": the comment names the unit [" << key.unit << "]";
    }
    if (key.required) {
      EXPECT_NE(rest.find("required"), std::string::npos) << key.name;
    } else {
      EXPECT_NE(rest.find(std::string("default ") + FormatValue(DefaultEventValue(key))),
                std::string::npos)
          << key.name << ": the comment names the default";
    }
  }
  for (const auto& [path, d] : documented) {
    EXPECT_NE(FindKey(path), nullptr)
        << "config/nightjar.yaml:" << d.line << ": " << path << " is not a key";
  }
}

// Every key of mqtt: and daemon: is listed in its section as `# name: default  # [unit]`
// (or set, naming its default), and every subscription key in the commented entry.
TEST(ExampleConfigTest, ListsEveryServiceKeyWithItsDefaultAndUnit) {
  static const std::regex key_line(R"( {2}(# )?([a-z_]+): (.*?)(?:  +# (.*))?)");
  std::map<std::string, std::pair<std::string, std::string>> found;  // path -> (value, comment)
  std::string section;
  std::istringstream in(ReadFile(kExamplePath));
  for (std::string line; std::getline(in, line);) {
    if (!line.empty() && line[0] != ' ' && line[0] != '#') {
      section = line.substr(0, line.find(':'));
      continue;
    }
    std::smatch m;
    if ((section == "mqtt" || section == "daemon") && std::regex_match(line, m, key_line)) {
      found[section + "." + m[2].str()] = {m[3].str(), m[4].str()};
    }
  }
  for (const ServiceKeySpec& key : ServiceKeys()) {
    const auto it = found.find(std::string(key.path));
    if (it == found.end()) {
      ADD_FAILURE() << key.path << " is not listed in config/nightjar.yaml";
      continue;
    }
    const std::string default_text = FormatValue(DefaultServiceValue(key));
    EXPECT_EQ(it->second.first, default_text) << key.path << ": shows its default";
    if (!key.unit.empty()) {
      EXPECT_NE(it->second.second.find(std::string("[").append(key.unit).append("]")),
                std::string::npos)
          << key.path << ": names the unit";
    }
  }
  const std::string text = ReadFile(kExamplePath);
  for (const SubscriptionKeySpec& key : SubscriptionKeys()) {
    const std::regex entry_line("\\n *# +(- )?" + std::string(key.name) + ": ([^\\n]*)");
    std::smatch m;
    ASSERT_TRUE(std::regex_search(text, m, entry_line)) << key.name;
    if (key.required) {
      EXPECT_NE(m[2].str().find("required"), std::string::npos) << key.name;
    } else {
      EXPECT_NE(m[2].str().find("default"), std::string::npos) << key.name;
    }
  }
  const LoadResult r = LoadConfigFile(kExamplePath);
  ASSERT_TRUE(r.ok()) << AllErrors(r);
  ASSERT_EQ(r.config->service.mqtt.subscriptions.size(), 1u);
}

}  // namespace
}  // namespace nightjar::config
