#include "config/config.h"

#include <yaml-cpp/yaml.h>

#include <algorithm>
#include <cerrno>
#include <charconv>
#include <cmath>
#include <cstdint>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <limits>
#include <map>
#include <memory>
#include <set>
#include <span>
#include <sstream>
#include <string>
#include <system_error>
#include <tuple>
#include <utility>
#include <vector>

namespace nightjar::config {
namespace {

constexpr std::string_view kNonPlainTag = "!";  // yaml-cpp: quoted scalar
constexpr std::string_view kStrTag = "tag:yaml.org,2002:str";
constexpr int kMaxSuggestDistance = 2;

// ---------------------------------------------------------------------------------------
// Scalar parsing. YAML 1.2 core schema numbers, strictly: no YAML 1.1 forms (0x, 0o, 1_000,
// yes/no), no quoted numbers, no NaN.

bool IsQuoted(const YAML::Node& node) {
  return node.Tag() == kNonPlainTag || node.Tag() == kStrTag;
}

std::string Quote(std::string_view text) { return "'" + std::string(text) + "'"; }

const char* NodeKind(const YAML::Node& node) {
  switch (node.Type()) {
    case YAML::NodeType::Map:
      return "a mapping";
    case YAML::NodeType::Sequence:
      return "a sequence";
    case YAML::NodeType::Null:
      return "nothing";
    default:
      return "a scalar";
  }
}

std::optional<double> ParseDouble(std::string_view text, std::string& error) {
  static constexpr std::string_view kPosInf[] = {".inf", ".Inf", ".INF", "+.inf", "+.Inf", "+.INF"};
  static constexpr std::string_view kNegInf[] = {"-.inf", "-.Inf", "-.INF"};
  static constexpr std::string_view kNan[] = {".nan", ".NaN", ".NAN"};
  for (std::string_view s : kPosInf) {
    if (text == s) return std::numeric_limits<double>::infinity();
  }
  for (std::string_view s : kNegInf) {
    if (text == s) return -std::numeric_limits<double>::infinity();
  }
  for (std::string_view s : kNan) {
    if (text == s) {
      error = "NaN is not allowed";
      return std::nullopt;
    }
  }
  const bool digits_only =
      !text.empty() && text.find_first_not_of("0123456789+-.eE") == std::string_view::npos;
  std::string_view body = text;
  if (!body.empty() && body.front() == '+') body.remove_prefix(1);
  double value = 0.0;
  const auto [end, ec] = std::from_chars(body.data(), body.data() + body.size(), value);
  if (!digits_only || ec == std::errc::invalid_argument || end != body.data() + body.size()) {
    error = "expected a number, got " + Quote(text);
    return std::nullopt;
  }
  if (ec == std::errc::result_out_of_range) {
    error = Quote(text) + " is out of the range of a double";
    return std::nullopt;
  }
  return value;
}

template <typename Int>
std::optional<Int> ParseInteger(std::string_view text, std::string& error) {
  std::string_view body = text;
  if (!body.empty() && body.front() == '+') body.remove_prefix(1);
  Int value = 0;
  const auto [end, ec] = std::from_chars(body.data(), body.data() + body.size(), value);
  if (body.empty() || ec == std::errc::invalid_argument || end != body.data() + body.size()) {
    error = "expected an integer, got " + Quote(text);
    return std::nullopt;
  }
  if (ec == std::errc::result_out_of_range) {
    error = Quote(text) + " is out of the integer range";
    return std::nullopt;
  }
  return value;
}

const char* TypeName(ValueType type) {
  switch (type) {
    case ValueType::kString:
      return "a string";
    case ValueType::kBool:
      return "true or false";
    case ValueType::kInt:
      return "an integer";
    case ValueType::kDouble:
      return "a number";
    case ValueType::kPriority:
      return "one of low, medium, high";
    case ValueType::kForecaster:
      return "one of lstm, last_value";
    case ValueType::kEvents:
      return "a list of event templates (- name: ..., shape: [...])";
    case ValueType::kNumberList:
      return "a list of numbers";
  }
  return "a value";
}

// Parses a scalar `node` as a value of `type` within `bounds`, or says why it cannot
// (message without key path). Lists are parsed by the loader, element by element.
std::optional<Value> ParseScalarValue(ValueType type, const Bounds& bounds, const YAML::Node& node,
                                      std::string& error) {
  if (node.IsNull()) {
    error = std::string("missing value: expected ") + TypeName(type);
    return std::nullopt;
  }
  if (!node.IsScalar()) {
    error = std::string("expected ") + TypeName(type) + ", got " + NodeKind(node);
    return std::nullopt;
  }
  const std::string& text = node.Scalar();
  if (type == ValueType::kString) return Value(text);
  if (type == ValueType::kPriority) {
    if (std::optional<core::Priority> p = ParsePriority(text)) return Value(*p);
    error = "expected one of low, medium, high, got " + Quote(text);
    return std::nullopt;
  }
  if (type == ValueType::kForecaster) {
    if (std::optional<core::Forecaster> f = ParseForecaster(text)) return Value(*f);
    error = "expected one of lstm, last_value, got " + Quote(text);
    return std::nullopt;
  }
  if (type == ValueType::kEvents || type == ValueType::kNumberList) {
    error = std::string("expected ") + TypeName(type) + ", got a scalar";
    return std::nullopt;
  }
  if (IsQuoted(node)) {
    error = std::string("expected ") + TypeName(type) + ", got the string \"" + text +
            "\" (remove the quotes)";
    return std::nullopt;
  }
  if (type == ValueType::kBool) {
    if (text == "true" || text == "True" || text == "TRUE") return Value(true);
    if (text == "false" || text == "False" || text == "FALSE") return Value(false);
    error = "expected true or false, got " + Quote(text);
    return std::nullopt;
  }
  double number = 0.0;
  Value value;
  if (type == ValueType::kInt) {
    const std::optional<int> i = ParseInteger<int>(text, error);
    if (!i) return std::nullopt;
    number = *i;
    value = *i;
  } else {
    const std::optional<double> d = ParseDouble(text, error);
    if (!d) return std::nullopt;
    number = *d;
    value = *d;
  }
  if (!bounds.Contains(number)) {
    const std::string rule = bounds.Describe();
    const bool words = rule.front() != '[' && rule.front() != '(';
    error = std::string("must be ") + (words ? "" : "in ") + rule + ", got " + text;
    return std::nullopt;
  }
  return value;
}

// ---------------------------------------------------------------------------------------
// "Did you mean": optimal string alignment distance (Levenshtein plus adjacent
// transpositions, so "max_valeu" is 1 from "max_value").

int EditDistance(std::string_view a, std::string_view b) {
  const std::size_t n = a.size();
  const std::size_t m = b.size();
  std::vector<std::vector<int>> d(n + 1, std::vector<int>(m + 1, 0));
  for (std::size_t i = 0; i <= n; ++i) d[i][0] = static_cast<int>(i);
  for (std::size_t j = 0; j <= m; ++j) d[0][j] = static_cast<int>(j);
  for (std::size_t i = 1; i <= n; ++i) {
    for (std::size_t j = 1; j <= m; ++j) {
      const int cost = a[i - 1] == b[j - 1] ? 0 : 1;
      d[i][j] = std::min({d[i - 1][j] + 1, d[i][j - 1] + 1, d[i - 1][j - 1] + cost});
      if (i > 1 && j > 1 && a[i - 1] == b[j - 2] && a[i - 2] == b[j - 1]) {
        d[i][j] = std::min(d[i][j], d[i - 2][j - 2] + 1);
      }
    }
  }
  return d[n][m];
}

// The single closest candidate within kMaxSuggestDistance, or empty (none, or a tie).
std::string ClosestCandidate(std::string_view name, const std::vector<std::string>& candidates) {
  int best = kMaxSuggestDistance + 1;
  std::string choice;
  bool tie = false;
  for (const std::string& c : candidates) {
    const int d = EditDistance(name, c);
    if (d < best) {
      best = d;
      choice = c;
      tie = false;
    } else if (d == best && c != choice) {
      tie = true;
    }
  }
  return tie ? std::string() : choice;
}

// Same value? (Value holds event templates, which have no operator==; the formatted text is
// exact: doubles print in round-trip form.)
bool SameValue(const Value& a, const Value& b) {
  return a.index() == b.index() && FormatValue(a) == FormatValue(b);
}

std::vector<std::string> SectionNames() {
  std::vector<std::string> sections;
  for (const KeySpec& key : ChannelKeys()) {
    const std::string section(key.section());
    if (!section.empty() &&
        std::find(sections.begin(), sections.end(), section) == sections.end()) {
      sections.push_back(section);
    }
  }
  return sections;
}

bool IsSection(std::string_view name) {
  for (const KeySpec& key : ChannelKeys()) {
    if (!key.section().empty() && key.section() == name) return true;
  }
  return false;
}

// Names that may appear directly inside `section` ("" = a block's top level).
std::vector<std::string> NamesIn(std::string_view section, bool with_match) {
  std::vector<std::string> names;
  if (section.empty()) {
    if (with_match) names.emplace_back("match");
    for (const std::string& s : SectionNames()) names.push_back(s);
  }
  for (const KeySpec& key : ChannelKeys()) {
    if (key.section() == section) names.emplace_back(key.name());
  }
  return names;
}

// ---------------------------------------------------------------------------------------

// Where in the file something is, 1-based.
struct Location {
  int line = 0;
  int column = 0;
};

Location At(const YAML::Mark& mark, Location fallback = {}) {
  if (mark.is_null() || mark.line < 0) return fallback;
  return {mark.line + 1, mark.column + 1};
}

// One block of ChannelOptions keys: `defaults:` or one `channels:` entry.
struct Block {
  std::string prefix;  // "defaults", "channels[2]"
  Location location;   // where validation errors that no set key explains are reported
  std::vector<KeySetting>* settings = nullptr;
};

class Loader {
 public:
  explicit Loader(std::string_view source) : source_(source) {}

  LoadResult Load(std::string_view yaml) {
    try {
      const std::vector<YAML::Node> documents = YAML::LoadAll(std::string(yaml));
      if (documents.size() > 1) {
        Error(At(documents[1].Mark(), {1, 1}), "",
              "only one YAML document per file (found " + std::to_string(documents.size()) + ")");
      }
      if (!documents.empty()) LoadRoot(documents[0]);
    } catch (const YAML::Exception& e) {
      Error(At(e.mark, {1, 1}), "", e.msg.empty() ? std::string(e.what()) : e.msg);
    }
    Validate();
    ValidateService();
    std::stable_sort(errors_.begin(), errors_.end(),
                     [](const ConfigError& a, const ConfigError& b) {
                       return std::tie(a.line, a.column) < std::tie(b.line, b.column);
                     });
    LoadResult result;
    result.errors = std::move(errors_);
    if (result.errors.empty()) result.config = std::move(config_);
    return result;
  }

 private:
  void Error(Location at, std::string key_path, std::string message) {
    errors_.push_back(ConfigError{std::string(source_), at.line, at.column, std::move(key_path),
                                  std::move(message)});
  }

  // Reports a repeated key in one mapping; returns true if `name` was seen before.
  bool Duplicate(std::map<std::string, int>& seen, const std::string& name, Location at,
                 const std::string& path) {
    const auto [it, inserted] = seen.emplace(name, at.line);
    if (inserted) return false;
    Error(at, path, "duplicate key (first set on line " + std::to_string(it->second) + ")");
    return true;
  }

  // Key nodes must be plain scalars; returns false (and reports) otherwise.
  bool KeyName(const YAML::Node& key, const std::string& parent_path, std::string& name) {
    if (!key.IsScalar()) {
      Error(At(key.Mark()), parent_path, std::string("keys must be names, got ") + NodeKind(key));
      return false;
    }
    name = key.Scalar();
    return true;
  }

  static std::string Join(const std::string& a, std::string_view b) {
    if (b.empty()) return a;
    if (a.empty()) return std::string(b);
    return a + "." + std::string(b);
  }

  void LoadRoot(const YAML::Node& root) {
    if (root.IsNull()) return;
    if (!root.IsMap()) {
      Error(At(root.Mark(), {1, 1}), "",
            std::string("expected a mapping with engine:, defaults: and channels:, got ") +
                NodeKind(root));
      return;
    }
    std::map<std::string, int> seen;
    for (const auto& entry : root) {
      std::string name;
      if (!KeyName(entry.first, "", name)) continue;
      const Location at = At(entry.first.Mark());
      if (Duplicate(seen, name, at, name)) continue;
      if (name == "engine") {
        LoadEngine(entry.second, at);
      } else if (name == "defaults") {
        defaults_location_ = at;
        LoadSection(entry.second, "defaults", "", false, at, defaults_settings_, nullptr);
      } else if (name == "channels") {
        LoadChannels(entry.second, at);
      } else if (name == "mqtt" || name == "daemon") {
        LoadServiceSection(entry.second, name, at);
      } else {
        std::string message = "unknown top-level section";
        const std::string hint =
            ClosestCandidate(name, {"engine", "defaults", "channels", "mqtt", "daemon"});
        if (!hint.empty()) {
          message += "; did you mean '" + hint + "'?";
        } else if (FindKey(name) != nullptr || IsSection(name)) {
          message += "; channel keys go under 'defaults:' or a 'channels:' entry";
        } else {
          message += " (expected engine, defaults, channels, mqtt or daemon)";
        }
        Error(at, name, message);
      }
    }
  }

  // `mqtt:` or `daemon:`: scalar keys of ServiceKeys(), and mqtt.subscriptions.
  void LoadServiceSection(const YAML::Node& node, const std::string& section, Location key_at) {
    if (node.IsNull()) return;
    if (!node.IsMap()) {
      Error(At(node.Mark(), key_at), section,
            std::string("expected a mapping of keys, got ") + NodeKind(node));
      return;
    }
    std::vector<std::string> names;
    for (const ServiceKeySpec& key : ServiceKeys()) {
      if (key.section() == section) names.emplace_back(key.name());
    }
    if (section == "mqtt") names.emplace_back("subscriptions");
    std::map<std::string, int> seen;
    for (const auto& entry : node) {
      std::string name;
      if (!KeyName(entry.first, section, name)) continue;
      const Location at = At(entry.first.Mark());
      const std::string path = section + "." + name;
      if (Duplicate(seen, name, at, path)) continue;
      const YAML::Node& value = entry.second;
      const Location value_at = value.IsNull() ? at : At(value.Mark(), at);
      if (path == "mqtt.subscriptions") {
        LoadSubscriptions(value, value_at);
        continue;
      }
      const ServiceKeySpec* key = FindServiceKey(path);
      if (key == nullptr) {
        const std::string hint = ClosestCandidate(name, names);
        Error(at, path,
              hint.empty() ? "unknown key in '" + section + ":'"
                           : "unknown key; did you mean '" + hint + "'?");
        continue;
      }
      std::string error;
      std::optional<Value> parsed = ParseScalarValue(key->type(), key->bounds, value, error);
      if (parsed && !key->choices.empty()) {
        parsed = CheckChoice(std::get<std::string>(*parsed), key->choices, error);
      }
      if (!parsed) {
        Error(value_at, path, error);
        continue;
      }
      SetServiceValue(*key, *parsed, config_.service);
      service_locations_[key->path] = value_at;
    }
  }

  static std::optional<Value> CheckChoice(const std::string& text,
                                          std::span<const std::string_view> choices,
                                          std::string& error) {
    std::string list;
    for (const std::string_view choice : choices) {
      if (text == choice) return Value(text);
      list.append(list.empty() ? "" : ", ").append(choice);
    }
    error = "expected one of " + list + ", got " + Quote(text);
    return std::nullopt;
  }

  void LoadSubscriptions(const YAML::Node& node, Location at) {
    const std::string path = "mqtt.subscriptions";
    if (node.IsNull()) return;
    if (!node.IsSequence()) {
      Error(
          at, path,
          std::string("expected a list of {topic, channel, ...} mappings, got ") + NodeKind(node));
      return;
    }
    std::size_t index = 0;
    for (const auto& item : node) {
      const std::string item_path = path + "[" + std::to_string(index++) + "]";
      const Location item_at = At(item.Mark(), at);
      if (!item.IsMap()) {
        Error(item_at, item_path,
              std::string("expected a mapping with topic: and channel:, got ") + NodeKind(item));
        continue;
      }
      SubscriptionConfig entry;
      entry.line = item_at.line;
      entry.column = item_at.column;
      std::map<std::string, int> seen;
      std::map<std::string, Location> where;
      for (const auto& kv : item) {
        std::string name;
        if (!KeyName(kv.first, item_path, name)) continue;
        const Location key_at = At(kv.first.Mark());
        const std::string key_path = item_path + "." + name;
        if (Duplicate(seen, name, key_at, key_path)) continue;
        const SubscriptionKeySpec* key = FindSubscriptionKey(name);
        if (key == nullptr) {
          std::vector<std::string> names;
          for (const SubscriptionKeySpec& k : SubscriptionKeys()) names.emplace_back(k.name);
          const std::string hint = ClosestCandidate(name, names);
          Error(key_at, key_path,
                hint.empty() ? "unknown key of a subscription"
                             : "unknown key; did you mean '" + hint + "'?");
          continue;
        }
        const YAML::Node& value = kv.second;
        const Location value_at = value.IsNull() ? key_at : At(value.Mark(), key_at);
        where[name] = value_at;
        std::string error;
        std::optional<Value> parsed = ParseScalarValue(ValueType::kString, {}, value, error);
        if (parsed && !key->choices.empty()) {
          parsed = CheckChoice(std::get<std::string>(*parsed), key->choices, error);
        }
        if (!parsed) {
          Error(value_at, key_path, error);
          continue;
        }
        *key->field(entry) = std::get<std::string>(*parsed);
      }
      for (const SubscriptionKeySpec& key : SubscriptionKeys()) {
        const std::string name(key.name);
        if (key.required && seen.count(name) == 0) {
          Error(item_at, item_path + "." + name, "missing: every subscription needs it");
        } else if (key.required && key.field(entry)->empty() && where.count(name) != 0) {
          Error(where[name], item_path + "." + name, "must not be empty");
        }
      }
      if (entry.payload == "plain") {
        for (const char* json_only : {"value_field", "time_field", "time_unit"}) {
          if (where.count(json_only) != 0) {
            Error(where[json_only], item_path + "." + json_only,
                  "only for payload: json (this subscription's payload is plain)");
          }
        }
      } else if (where.count("value_field") != 0 && entry.value_field.empty()) {
        Error(where["value_field"], item_path + ".value_field", "must not be empty");
      }
      config_.service.mqtt.subscriptions.push_back(std::move(entry));
    }
  }

  // Cross-key rules of mqtt: and daemon:, reported at the later of the keys involved.
  void ValidateService() {
    const MqttConfig& mqtt = config_.service.mqtt;
    const auto located = [this](std::string_view path) {
      const auto it = service_locations_.find(path);
      return it == service_locations_.end() ? Location{1, 1} : it->second;
    };
    if (!mqtt.password_file.empty() && mqtt.username.empty()) {
      Error(located("mqtt.password_file"), "mqtt.password_file", "needs mqtt.username");
    }
    if (!mqtt.clean_session && mqtt.protocol == "5") {
      Error(located("mqtt.clean_session"), "mqtt.clean_session",
            "false needs protocol 3.1.1 (MQTT 5 sessions are not supported)");
    }
    if (!mqtt.clean_session && mqtt.client_id.empty()) {
      Error(located("mqtt.clean_session"), "mqtt.clean_session", "false needs a client_id");
    }
    for (const std::string_view key :
         {"mqtt.alert_prefix", "mqtt.state_prefix", "mqtt.status_topic", "mqtt.command_topic",
          "mqtt.reply_topic"}) {
      std::string text = std::get<std::string>(std::visit(
          [](auto* f) { return Value(*f); }, FindServiceKey(key)->field(config_.service)));
      if (text.empty() || text.find_first_of("+#") != std::string::npos || text.front() == '/' ||
          text.back() == '/') {
        Error(located(key), std::string(key),
              "must be an MQTT topic: not empty, no + or #, no leading or trailing /");
      }
    }
  }

  void LoadEngine(const YAML::Node& node, Location key_at) {
    if (node.IsNull()) return;
    if (!node.IsMap()) {
      Error(At(node.Mark(), key_at), "engine",
            std::string("expected a mapping, got ") + NodeKind(node));
      return;
    }
    std::map<std::string, int> seen;
    for (const auto& entry : node) {
      std::string name;
      if (!KeyName(entry.first, "engine", name)) continue;
      const Location at = At(entry.first.Mark());
      const std::string path = "engine." + name;
      if (Duplicate(seen, name, at, path)) continue;
      if (name != "seed") {
        const std::string hint = ClosestCandidate(name, {"seed"});
        Error(at, path,
              hint.empty() ? "unknown key (engine has only 'seed')"
                           : "unknown key; did you mean '" + hint + "'?");
        continue;
      }
      const YAML::Node& value = entry.second;
      const Location value_at = At(value.Mark(), at);
      if (value.IsNull() || !value.IsScalar() || IsQuoted(value)) {
        Error(value.IsNull() ? at : value_at, path,
              value.IsScalar() && !value.IsNull()
                  ? "expected an integer in [0, 2^64), got the string \"" + value.Scalar() + "\""
                  : std::string("expected an integer in [0, 2^64), got ") + NodeKind(value));
        continue;
      }
      std::string error;
      const std::string& text = value.Scalar();
      if (text.find_first_not_of("0123456789") != std::string::npos) {
        Error(value_at, path, "expected an integer in [0, 2^64), got " + Quote(text));
        continue;
      }
      if (std::optional<std::uint64_t> seed = ParseInteger<std::uint64_t>(text, error)) {
        config_.engine.seed = *seed;
      } else {
        Error(value_at, path, error);
      }
    }
  }

  void LoadChannels(const YAML::Node& node, Location key_at) {
    if (node.IsNull()) return;
    if (!node.IsSequence()) {
      Error(At(node.Mark(), key_at), "channels",
            std::string("expected a sequence of override blocks (- match: ...), got ") +
                NodeKind(node));
      return;
    }
    std::size_t index = 0;
    for (const auto& item : node) {
      const std::string prefix = "channels[" + std::to_string(index++) + "]";
      ChannelOverride block;
      const Location item_at = At(item.Mark(), key_at);
      block.line = item_at.line;
      block.column = item_at.column;
      if (!item.IsMap()) {
        Error(item_at, prefix,
              std::string("expected a mapping with 'match' and keys, got ") + NodeKind(item));
      } else {
        bool has_match = false;
        LoadSection(item, prefix, "", true, item_at, block.settings, &block, &has_match);
        if (!has_match) Error(item_at, prefix + ".match", "missing: every block needs a glob");
      }
      config_.overrides.push_back(std::move(block));
    }
  }

  // Loads the keys of `node` (a mapping inside `section`, "" = the block's top level) into
  // `settings`. `block` is set for channel entries (they accept `match`).
  void LoadSection(const YAML::Node& node, const std::string& prefix, std::string_view section,
                   bool channel_entry, Location key_at, std::vector<KeySetting>& settings,
                   ChannelOverride* block, bool* has_match = nullptr) {
    const std::string section_path = Join(prefix, section);
    if (node.IsNull()) return;  // `sensor:` with every key commented out
    if (!node.IsMap()) {
      Error(At(node.Mark(), key_at), section_path,
            std::string("expected a mapping of keys, got ") + NodeKind(node));
      return;
    }
    std::map<std::string, int> seen;
    for (const auto& entry : node) {
      std::string name;
      if (!KeyName(entry.first, section_path, name)) continue;
      const Location at = At(entry.first.Mark());
      const std::string path = Join(section_path, name);
      if (Duplicate(seen, name, at, path)) continue;
      const YAML::Node& value = entry.second;
      const Location value_at = value.IsNull() ? at : At(value.Mark(), at);

      if (section.empty() && channel_entry && name == "match") {
        *has_match = true;
        block->line = value_at.line;
        block->column = value_at.column;
        if (!value.IsScalar() || value.IsNull()) {
          Error(value_at, path, std::string("expected a glob string, got ") + NodeKind(value));
          continue;
        }
        block->match = value.Scalar();
        if (core::Status s = ValidateGlob(block->match); !s.ok()) {
          Error(value_at, path, "bad glob \"" + block->match + "\": " + s.message());
        }
        continue;
      }
      if (section.empty() && IsSection(name)) {
        LoadSection(value, prefix, name, channel_entry, at, settings, block);
        continue;
      }
      const KeySpec* key = FindKey(Join(std::string(section), name));
      if (key != nullptr && key->section() != section) key = nullptr;  // "sensor.min_value:"
      if (key == nullptr) {
        Error(at, path, UnknownKeyMessage(name, section, channel_entry));
        continue;
      }
      if (key->type() == ValueType::kEvents) {
        if (std::optional<std::vector<core::EventTemplate>> events =
                LoadEvents(value, path, value_at)) {
          settings.push_back(
              KeySetting{key, Value(std::move(*events)), value_at.line, value_at.column});
        }
        continue;
      }
      std::string error;
      if (std::optional<Value> parsed = ParseScalarValue(key->type(), key->bounds, value, error)) {
        settings.push_back(KeySetting{key, std::move(*parsed), value_at.line, value_at.column});
      } else {
        Error(value_at, path, error);
      }
    }
  }

  // `events:`: a list of mappings with the EventTemplateKeys. Every entry is checked with
  // core::ValidateEventTemplate; returns the list only when it has no error at all.
  std::optional<std::vector<core::EventTemplate>> LoadEvents(const YAML::Node& node,
                                                             const std::string& path, Location at) {
    if (node.IsNull()) {
      Error(
          at, path,
          std::string("missing value: expected ") + TypeName(ValueType::kEvents) + "; [] for none");
      return std::nullopt;
    }
    if (!node.IsSequence()) {
      Error(at, path,
            std::string("expected ") + TypeName(ValueType::kEvents) + ", got " + NodeKind(node));
      return std::nullopt;
    }
    const std::size_t errors_before = errors_.size();
    std::vector<core::EventTemplate> events;
    std::size_t index = 0;
    for (const auto& item : node) {
      const std::string item_path = path + "[" + std::to_string(index++) + "]";
      const Location item_at = At(item.Mark(), at);
      if (!item.IsMap()) {
        Error(item_at, item_path,
              std::string("expected a mapping with name: and shape:, got ") + NodeKind(item));
        continue;
      }
      core::EventTemplate event;
      std::map<std::string, int> seen;
      std::map<std::string, Location> where;  // key name -> value position
      const std::size_t item_errors = errors_.size();
      for (const auto& entry : item) {
        std::string name;
        if (!KeyName(entry.first, item_path, name)) continue;
        const Location key_at = At(entry.first.Mark());
        const std::string key_path = item_path + "." + name;
        if (Duplicate(seen, name, key_at, key_path)) continue;
        const EventKeySpec* key = FindEventKey(name);
        if (key == nullptr) {
          std::vector<std::string> names;
          for (const EventKeySpec& k : EventTemplateKeys()) names.emplace_back(k.name);
          const std::string hint = ClosestCandidate(name, names);
          Error(key_at, key_path,
                hint.empty() ? "unknown key of an event template"
                             : "unknown key; did you mean '" + hint + "'?");
          continue;
        }
        const YAML::Node& value = entry.second;
        const Location value_at = value.IsNull() ? key_at : At(value.Mark(), key_at);
        where[name] = value_at;
        if (std::optional<Value> parsed = LoadEventValue(*key, value, key_path, value_at)) {
          SetEventValue(*key, *parsed, event);
        }
      }
      for (const EventKeySpec& key : EventTemplateKeys()) {
        if (key.required && seen.count(std::string(key.name)) == 0) {
          Error(item_at, item_path + "." + std::string(key.name), "missing: every event needs it");
        }
      }
      if (errors_.size() == item_errors) {
        if (core::Status s = core::ValidateEventTemplate(event); !s.ok()) {
          // "shape: needs at least 4 values": point at that key.
          const std::string& message = s.message();
          const std::size_t colon = message.find(": ");
          const std::string name = colon == std::string::npos ? "" : message.substr(0, colon);
          const auto it = where.find(name);
          Error(it == where.end() ? item_at : it->second,
                name.empty() ? item_path : item_path + "." + name,
                colon == std::string::npos ? message : message.substr(colon + 2));
        }
      }
      events.push_back(std::move(event));
    }
    if (errors_.size() != errors_before) return std::nullopt;
    return events;
  }

  std::optional<Value> LoadEventValue(const EventKeySpec& key, const YAML::Node& value,
                                      const std::string& path, Location at) {
    std::string error;
    if (key.type() != ValueType::kNumberList) {
      std::optional<Value> parsed = ParseScalarValue(key.type(), key.bounds, value, error);
      if (!parsed) Error(at, path, error);
      return parsed;
    }
    if (!value.IsSequence()) {
      Error(at, path, std::string("expected a list of numbers, got ") + NodeKind(value));
      return std::nullopt;
    }
    std::vector<double> numbers;
    bool ok = true;
    std::size_t index = 0;
    for (const auto& element : value) {
      const std::string element_path = path + "[" + std::to_string(index++) + "]";
      std::optional<Value> parsed =
          ParseScalarValue(ValueType::kDouble, key.bounds, element, error);
      if (!parsed) {
        Error(At(element.Mark(), at), element_path, error);
        ok = false;
        continue;
      }
      numbers.push_back(std::get<double>(*parsed));
    }
    if (!ok) return std::nullopt;
    return Value(std::move(numbers));
  }

  static std::string UnknownKeyMessage(const std::string& name, std::string_view section,
                                       bool channel_entry) {
    std::string message = "unknown key";
    if (section.empty() && FindKey(name) != nullptr) {
      const KeySpec* key = FindKey(name);
      return message + "; dotted keys are not supported, nest it: '" + std::string(key->section()) +
             ": { " + std::string(key->name()) + ": ... }'";
    }
    const std::string hint = ClosestCandidate(name, NamesIn(section, channel_entry));
    if (!hint.empty()) return message + "; did you mean '" + hint + "'?";
    // Right name, wrong place: "min_value" at the top of a block belongs under sensor:.
    std::vector<const KeySpec*> elsewhere;
    for (const KeySpec& key : ChannelKeys()) {
      if (key.name() == name && key.section() != section) elsewhere.push_back(&key);
    }
    if (elsewhere.size() == 1) {
      const KeySpec& key = *elsewhere.front();
      if (key.section().empty())
        return message + "; '" + name + "' is a top-level key of the block";
      return message + "; did you mean '" + std::string(key.path) + "' (under '" +
             std::string(key.section()) + ":')?";
    }
    if (!section.empty()) return message + " in '" + std::string(section) + ":'";
    return message;
  }

  // --- Validation of the resolved options, after parsing. --------------------------------

  // Key paths named in a core validation message, in order: the part before ": " first.
  struct Mention {
    std::vector<const KeySpec*> subject;  // keys in the part before ": "
    std::vector<const KeySpec*> other;    // full key paths in the rest
    std::string remainder;                // text after ": " (the rule)
  };

  static std::vector<std::string> Tokens(std::string_view text) {
    std::vector<std::string> tokens;
    std::string current;
    for (const char c : text) {
      if ((c >= 'a' && c <= 'z') || (c >= '0' && c <= '9') || c == '_' || c == '.') {
        current += c;
      } else if (!current.empty()) {
        tokens.push_back(std::move(current));
        current.clear();
      }
    }
    if (!current.empty()) tokens.push_back(std::move(current));
    return tokens;
  }

  static Mention Mentions(const std::string& message) {
    Mention m;
    const std::size_t colon = message.find(": ");
    const std::string subject = message.substr(0, colon);
    m.remainder = colon == std::string::npos ? message : message.substr(colon + 2);
    std::string section;
    for (const std::string& token : Tokens(subject)) {
      const KeySpec* key = FindKey(token);
      if (key == nullptr && !section.empty()) key = FindKey(section + "." + token);
      if (key == nullptr) continue;
      section = std::string(key->section());
      m.subject.push_back(key);
    }
    if (colon != std::string::npos) {
      for (const std::string& token : Tokens(m.remainder)) {
        if (const KeySpec* key = FindKey(token)) m.other.push_back(key);
      }
    }
    return m;
  }

  static const KeySetting* SettingFor(const std::vector<KeySetting>& settings, const KeySpec* key) {
    const KeySetting* found = nullptr;
    for (const KeySetting& s : settings) {
      if (s.key == key) found = &s;
    }
    return found;
  }

  // Runs core::ValidateChannelOptions on base + block, reporting each distinct failure.
  // core stops at its first failure, so after each one the keys it names are put back to
  // their base values and validation runs again: cross-field errors are collected too.
  // Messages in `already_reported` (from the defaults) are not repeated. Returns the
  // messages seen.
  std::set<std::string> ValidateBlock(const core::ChannelOptions& base, const Block& block,
                                      const std::set<std::string>& already_reported) {
    core::ChannelOptions options = base;
    for (const KeySetting& s : *block.settings) SetValue(*s.key, s.value, options);
    options.events.clear();  // each entry was validated where it was read (LoadEvents)
    std::set<std::string> seen;
    for (std::size_t round = 0; round <= ChannelKeys().size(); ++round) {
      const core::Status status = core::ValidateChannelOptions(options);
      if (status.ok()) break;
      std::string message = status.message();
      // LstmPredictor::Validate names its own fields "lstm.*"; the config calls them predictor.*.
      for (std::size_t at = message.find("lstm."); at != std::string::npos;
           at = message.find("lstm.", at)) {
        message.replace(at, 5, "predictor.");
      }
      if (!seen.insert(message).second) break;
      const Mention m = Mentions(message);
      if (already_reported.count(message) == 0) Report(block, m, message);
      // Back to the base values; if the base itself is what fails (an error in the
      // defaults, reported there), to the built-in ones.
      if (!ResetKeys(m, base, options) && !ResetKeys(m, core::ChannelOptions{}, options)) break;
    }
    return seen;
  }

  // Sets every key `m` names to its value in `from`; returns whether anything changed.
  static bool ResetKeys(const Mention& m, const core::ChannelOptions& from,
                        core::ChannelOptions& options) {
    bool changed = false;
    for (const std::vector<const KeySpec*>* keys : {&m.subject, &m.other}) {
      for (const KeySpec* key : *keys) {
        const Value reset = GetValue(*key, from);
        if (!SameValue(GetValue(*key, options), reset)) {
          SetValue(*key, reset, options);
          changed = true;
        }
      }
    }
    return changed;
  }

  void Report(const Block& block, const Mention& m, const std::string& message) {
    // Point at the key the block set that the message is about: of those named before the
    // ": ", the one written last (it completed the conflict in "sensor.min_value/max_value"),
    // else one named in the rule.
    const KeySetting* located = nullptr;
    for (const KeySpec* key : m.subject) {
      const KeySetting* s = SettingFor(*block.settings, key);
      if (s != nullptr && (located == nullptr || std::tie(s->line, s->column) >
                                                     std::tie(located->line, located->column))) {
        located = s;
      }
    }
    for (const KeySpec* key : m.other) {
      if (located != nullptr) break;
      located = SettingFor(*block.settings, key);
    }
    const KeySpec* key = located != nullptr  ? located->key
                         : m.subject.empty() ? nullptr
                                             : m.subject.front();
    const std::string path = key == nullptr ? block.prefix : Join(block.prefix, key->path);
    const bool plain = m.subject.size() == 1 && key == m.subject.front();
    const Location at =
        located != nullptr ? Location{located->line, located->column} : block.location;
    Error(at, path, plain ? m.remainder : message);
  }

  void Validate() {
    const Block defaults{"defaults", defaults_location_, &defaults_settings_};
    const std::set<std::string> reported = ValidateBlock(core::ChannelOptions{}, defaults, {});
    core::ChannelOptions resolved_defaults;
    for (const KeySetting& s : defaults_settings_) SetValue(*s.key, s.value, resolved_defaults);
    config_.engine.defaults = resolved_defaults;
    for (std::size_t i = 0; i < config_.overrides.size(); ++i) {
      ChannelOverride& o = config_.overrides[i];
      const Block block{"channels[" + std::to_string(i) + "]", {o.line, o.column}, &o.settings};
      ValidateBlock(resolved_defaults, block, reported);
    }
  }

  std::string_view source_;
  LoadedConfig config_;
  std::vector<KeySetting> defaults_settings_;
  Location defaults_location_{1, 1};
  std::vector<ConfigError> errors_;
  std::map<std::string_view, Location> service_locations_;  // value positions of mqtt/daemon keys
};

}  // namespace

std::string ConfigError::ToString() const {
  std::string out = file;
  if (line > 0) out += ":" + std::to_string(line) + ":" + std::to_string(column);
  out += ": ";
  if (!key_path.empty()) out += key_path + ": ";
  return out + message;
}

void ChannelOverride::ApplyTo(core::ChannelOptions& options) const {
  for (const KeySetting& s : settings) SetValue(*s.key, s.value, options);
}

core::ChannelOptions LoadedConfig::Resolve(std::string_view channel) const {
  core::ChannelOptions options = engine.defaults;
  for (const ChannelOverride& o : overrides) {
    if (o.Matches(channel)) o.ApplyTo(options);
  }
  return options;
}

core::ChannelOptionsResolver LoadedConfig::Resolver() const {
  auto shared = std::make_shared<const LoadedConfig>(*this);
  return [shared](std::string_view channel) { return shared->Resolve(channel); };
}

LoadResult LoadConfigString(std::string_view yaml, std::string_view source_name) {
  return Loader(source_name).Load(yaml);
}

LoadResult LoadConfigFile(const std::string& path) {
  std::error_code ec;
  if (std::filesystem::is_directory(path, ec)) {
    LoadResult result;
    result.errors.push_back(ConfigError{path, 0, 0, "", "is a directory, not a config file"});
    return result;
  }
  std::ifstream in(path, std::ios::binary);
  if (!in) {
    LoadResult result;
    result.errors.push_back(
        ConfigError{path, 0, 0, "", std::string("cannot open: ") + std::strerror(errno)});
    return result;
  }
  std::ostringstream text;
  text << in.rdbuf();
  if (in.bad()) {
    LoadResult result;
    result.errors.push_back(ConfigError{path, 0, 0, "", "read error"});
    return result;
  }
  return LoadConfigString(text.str(), path);
}

}  // namespace nightjar::config
