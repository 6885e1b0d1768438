#include "core/alert_json.h"

#include <array>
#include <charconv>
#include <cmath>
#include <cstddef>
#include <cstdint>

#include "core/timestamp_format.h"

namespace nightjar::core {
namespace {

constexpr std::string_view kReplacement = "\xEF\xBF\xBD";  // U+FFFD in UTF-8
constexpr std::string_view kHexDigits = "0123456789abcdef";

bool IsContinuation(unsigned char c) { return (c & 0xC0U) == 0x80U; }

// Length of the well-formed UTF-8 sequence at text[i] (Unicode Table 3-7), or, when it
// is ill-formed, minus the length of its maximal invalid subpart (at least 1).
int Utf8SequenceLength(std::string_view text, std::size_t i) {
  const auto lead = static_cast<unsigned char>(text[i]);
  int length = 0;
  unsigned char second_low = 0x80;  // allowed range of the second byte
  unsigned char second_high = 0xBF;
  if (lead >= 0xC2 && lead <= 0xDF) {
    length = 2;
  } else if (lead >= 0xE0 && lead <= 0xEF) {
    length = 3;
    if (lead == 0xE0) second_low = 0xA0;   // no overlong forms
    if (lead == 0xED) second_high = 0x9F;  // no surrogates
  } else if (lead >= 0xF0 && lead <= 0xF4) {
    length = 4;
    if (lead == 0xF0) second_low = 0x90;   // no overlong forms
    if (lead == 0xF4) second_high = 0x8F;  // nothing above U+10FFFF
  } else {
    return -1;  // a stray continuation byte, C0, C1 or F5..FF
  }
  for (int k = 1; k < length; ++k) {
    const std::size_t at = i + static_cast<std::size_t>(k);
    if (at >= text.size()) return -k;
    const auto c = static_cast<unsigned char>(text[at]);
    const bool ok = k == 1 ? (c >= second_low && c <= second_high) : IsContinuation(c);
    if (!ok) return -k;
  }
  return length;
}

void AppendField(std::string_view name, std::string* out) {
  out->push_back(',');
  AppendJsonString(name, out);
  out->push_back(':');
}

}  // namespace

void AppendJsonString(std::string_view text, std::string* out) {
  out->push_back('"');
  std::size_t i = 0;
  while (i < text.size()) {
    const auto c = static_cast<unsigned char>(text[i]);
    if (c >= 0x80) {
      const int length = Utf8SequenceLength(text, i);
      if (length > 0) {
        out->append(text.substr(i, static_cast<std::size_t>(length)));
        i += static_cast<std::size_t>(length);
      } else {
        out->append(kReplacement);
        i += static_cast<std::size_t>(-length);
      }
      continue;
    }
    switch (c) {
      case '"':
        out->append("\\\"");
        break;
      case '\\':
        out->append("\\\\");
        break;
      case '\b':
        out->append("\\b");
        break;
      case '\f':
        out->append("\\f");
        break;
      case '\n':
        out->append("\\n");
        break;
      case '\r':
        out->append("\\r");
        break;
      case '\t':
        out->append("\\t");
        break;
      default:
        if (c < 0x20) {
          out->append("\\u00");
          out->push_back(kHexDigits[static_cast<std::size_t>(c >> 4U)]);
          out->push_back(kHexDigits[static_cast<std::size_t>(c & 0x0FU)]);
        } else {
          out->push_back(static_cast<char>(c));
        }
    }
    ++i;
  }
  out->push_back('"');
}

void AppendJsonNumber(double value, std::string* out) {
  if (!std::isfinite(value)) {
    out->append("null");
    return;
  }
  // The shortest round-trip form of a finite double needs at most 24 characters.
  std::array<char, 32> buffer{};
  const std::to_chars_result result =
      std::to_chars(buffer.data(), buffer.data() + buffer.size(), value);
  out->append(buffer.data(), result.ptr);
}

void AppendAlertJson(const Alert& alert, std::string* out) {
  out->append(R"({"ts":")");
  AppendUtcTimestamp(alert.time, SecondFraction::kMillis, out);
  out->push_back('"');
  AppendField("channel", out);
  AppendJsonString(alert.channel, out);
  AppendField("kind", out);
  AppendJsonString(AlertKindName(alert.kind), out);
  AppendField("detector", out);
  AppendJsonString(DetectorName(alert.detector), out);
  AppendField("phase", out);
  AppendJsonString(AlertPhaseName(alert.phase), out);
  AppendField("value", out);
  AppendJsonNumber(alert.value, out);
  AppendField("expected", out);
  AppendJsonNumber(alert.expected, out);
  AppendField("z", out);
  AppendJsonNumber(alert.z, out);
  AppendField("statistic", out);
  AppendJsonNumber(alert.statistic, out);
  AppendField("threshold", out);
  AppendJsonNumber(alert.threshold, out);
  AppendField("priority", out);
  AppendJsonString(PriorityName(alert.priority), out);
  AppendField("message", out);
  AppendJsonString(alert.message, out);
  AppendField("annunciated", out);
  out->append(alert.annunciated ? "true" : "false");
  AppendField("episode", out);
  if (alert.asset.empty()) {
    out->append("null");
  } else {
    out->append(R"({"asset":)");
    AppendJsonString(alert.asset, out);
    AppendField("first_out", out);
    if (alert.episode_first_out.empty()) {
      out->append("null");
    } else {
      AppendJsonString(alert.episode_first_out, out);
    }
    AppendField("since", out);
    if (alert.episode_first_out.empty()) {
      out->append("null");
    } else {
      out->push_back('"');
      AppendUtcTimestamp(alert.episode_since, SecondFraction::kMillis, out);
      out->push_back('"');
    }
    AppendField("active", out);
    out->append(std::to_string(alert.episode_active));
    out->push_back('}');
  }
  out->push_back('}');
}

std::string AlertToJson(const Alert& alert) {
  std::string out;
  out.reserve(256 + alert.channel.size() + alert.message.size());
  AppendAlertJson(alert, &out);
  return out;
}

}  // namespace nightjar::core
