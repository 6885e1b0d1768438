// RenderReferenceYaml(): the key table as a loadable config file.
#include <limits>
#include <string>

#include "config/config.h"
#include "config/service_config.h"

namespace nightjar::config {
namespace {

// "; [0, 1)" after a number key's doc; nothing where any value of the type is allowed.
std::string RangeText(ValueType type, const Bounds& bounds) {
  const double inf = std::numeric_limits<double>::infinity();
  if (type == ValueType::kInt && bounds.lo == -inf && bounds.hi == inf) return "";
  if (type == ValueType::kInt || type == ValueType::kDouble) return "; " + bounds.Describe();
  if (type == ValueType::kNumberList) return "; each value " + bounds.Describe();
  return "";
}

// "[unit] doc; range" for the trailing comment of one key line.
std::string KeyComment(const KeySpec& key) {
  std::string comment;
  if (!key.unit.empty()) comment.append("[").append(key.unit).append("] ");
  comment += key.doc;
  return comment.append(RangeText(key.type(), key.bounds));
}

// The keys of one `events:` entry, as comments under `events: []`.
void AppendEventKeys(std::string& out) {
  out.append(
      "  # Each entry of events:, e.g. - { name: \"pump_start\", shape: [0, 5, 40, 35, 30] }\n");
  for (const EventKeySpec& key : EventTemplateKeys()) {
    out.append("  #   ").append(key.name).append(": ");
    out.append(key.required ? std::string("(required)") : FormatValue(DefaultEventValue(key)));
    out.append("  # ");
    if (!key.unit.empty()) out.append("[").append(key.unit).append("] ");
    out.append(key.doc);
    out.append(RangeText(key.type(), key.bounds)).append("\n");
  }
}

// "[unit] doc; range" or "doc; one of a, b" for a key of mqtt: or daemon:.
std::string ServiceKeyComment(const ServiceKeySpec& key) {
  std::string comment;
  if (!key.unit.empty()) comment.append("[").append(key.unit).append("] ");
  comment += key.doc;
  if (!key.choices.empty()) {
    comment += "; one of";
    for (std::size_t i = 0; i < key.choices.size(); ++i) {
      comment.append(i == 0 ? " " : ", ").append(key.choices[i]);
    }
  }
  return comment.append(RangeText(key.type(), key.bounds));
}

void AppendServiceSection(std::string_view section, std::string& out) {
  out.append(section).append(":\n");
  for (const ServiceKeySpec& key : ServiceKeys()) {
    if (key.section() != section) continue;
    out.append("  ")
        .append(key.name())
        .append(": ")
        .append(FormatValue(DefaultServiceValue(key)))
        .append("  # ")
        .append(ServiceKeyComment(key))
        .append("\n");
  }
  if (section != "mqtt") return;
  out.append("  subscriptions: []  # where samples come from; each entry:\n");
  for (const SubscriptionKeySpec& key : SubscriptionKeys()) {
    out.append("  #   ").append(key.name).append(": ");
    out.append(key.required ? std::string("(required)")
                            : FormatValue(DefaultSubscriptionValue(key)));
    out.append("  # ").append(key.doc).append("\n");
  }
}

}  // namespace

std::string RenderReferenceYaml() {
  std::string out =
      "# nightjar configuration reference: every key with its built-in default.\n"
      "# Generated from the key table (lib/config/key_table.cc) by\n"
      "# `nightjar check-config --print-defaults`; config/nightjar.yaml documents the layout.\n"
      "# Each key line: `key: default  # [unit] what it does; allowed range`.\n"
      "engine:\n"
      "  seed: " +
      std::to_string(core::EngineOptions{}.seed) +
      "  # mixed with each channel's name to seed its model: same seed, same alerts\n"
      "defaults:\n";
  std::string_view section;
  for (const KeySpec& key : ChannelKeys()) {
    if (key.section() != section) {
      section = key.section();
      if (!section.empty()) out.append("  ").append(section).append(":\n");
    }
    // Appends, not operator+: GCC 12 -O3 warns falsely (-Wrestrict) on "literal" + string.
    out.append(section.empty() ? 2 : 4, ' ')
        .append(key.name())
        .append(": ")
        .append(FormatValue(DefaultValue(key)))
        .append("  # ")
        .append(KeyComment(key))
        .append("\n");
    if (key.type() == ValueType::kEvents) AppendEventKeys(out);
  }
  out +=
      "# Override blocks, applied in order to every channel their glob matches:\n"
      "#   - match: \"cw2.pump_a.*\"   # * one level, ** any levels, ? one character\n"
      "#     unit: \"m3/h\"            # then any keys of defaults:\n"
      "channels: []\n"
      "# nightjar run only: the broker, topics and runtime.\n";
  AppendServiceSection("mqtt", out);
  AppendServiceSection("daemon", out);
  return out;
}

}  // namespace nightjar::config
