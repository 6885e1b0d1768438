// Safe quoting of untrusted bytes (topics, payloads) for error messages.
//
// Topics and payloads come from the network and may hold control characters, invalid
// UTF-8 or megabytes of junk; error messages end up in the daemon's log. These helpers
// copy at most `max_bytes` of the input, write bytes below 0x20 and 0x7F as \xNN and a
// backslash as \\, and append "..." when the input was cut. Bytes >= 0x80 pass through
// (UTF-8 names stay readable).
// Thread-safety: pure functions. Ownership: returns or appends to caller's strings.
#pragma once

#include <cstddef>
#include <string>
#include <string_view>

namespace nightjar::mqtt::internal {

inline constexpr std::size_t kMaxQuotedTopic = 200;
inline constexpr std::size_t kMaxQuotedPayload = 60;

void AppendPrintable(std::string_view text, std::size_t max_bytes, std::string* out);
std::string Printable(std::string_view text, std::size_t max_bytes);

// "topic <printable topic>: " — the prefix every per-message error starts with.
std::string TopicPrefix(std::string_view topic);

}  // namespace nightjar::mqtt::internal
