#include "mqtt/internal/text.h"

namespace nightjar::mqtt::internal {

void AppendPrintable(std::string_view text, std::size_t max_bytes, std::string* out) {
  constexpr std::string_view kHex = "0123456789abcdef";
  const std::size_t n = text.size() < max_bytes ? text.size() : max_bytes;
  for (std::size_t i = 0; i < n; ++i) {
    const auto byte = static_cast<unsigned char>(text[i]);
    if (byte < 0x20 || byte == 0x7F) {
      out->append("\\x");
      out->push_back(kHex[byte >> 4]);
      out->push_back(kHex[byte & 0x0F]);
    } else if (byte == '\\') {
      out->append("\\\\");
    } else {
      out->push_back(text[i]);
    }
  }
  if (n < text.size()) out->append("...");
}

std::string Printable(std::string_view text, std::size_t max_bytes) {
  std::string out;
  AppendPrintable(text, max_bytes, &out);
  return out;
}

std::string TopicPrefix(std::string_view topic) {
  std::string out = "topic ";
  AppendPrintable(topic, kMaxQuotedTopic, &out);
  out += ": ";
  return out;
}

}  // namespace nightjar::mqtt::internal
