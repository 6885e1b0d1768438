// A fast path for the common JSON sample payload: one flat object such as
// {"t": 1733140000.5, "value": 12.3}.
//
// PayloadParser (mqtt/payload.h) parses a kJson payload with nlohmann-json, which builds a
// whole document (a map node and a heap string per key) for every message. ScanFlatJson
// reads the same bytes in one pass without allocating, but only succeeds where it is sure
// to give exactly what the full path gives: a single-level object whose members are
// numbers, strings without escapes (printable ASCII only), true, false or null, between
// JSON whitespace (space, \t, \n, \r), holding the value key once (and the time key once,
// when set) with a value the full path accepts. Anything else — nesting, arrays, escapes,
// bytes >= 0x80, a repeated key, trailing bytes, a malformed number, a number the full
// path would reject or read differently (more than 18 integer digits, a float that does
// not convert cleanly), a missing field, a bad value or time — returns nullopt, and the
// caller runs the full path, which then gives the sample or the documented error. So the
// fast path never produces an error text of its own.
//
// Only single-key field paths are handled ("value", not "data.value"); FlatJsonFields
// with a dotted path must not be passed (PayloadParser does not use the fast path then).
//
// Thread-safety: pure function. Ownership: views into the caller's strings, used during
// the call only.
#pragma once

#include <optional>
#include <string_view>

#include "core/time.h"
#include "mqtt/payload.h"

namespace nightjar::mqtt::internal {

struct FlatJsonFields {
  std::string_view value_key;  // the value's key, no '.'
  std::string_view time_key;   // the time's key, no '.'; empty = the arrival time
  TimeEncoding time_encoding = TimeEncoding::kIso8601;
};

// The sample in `payload` when it is a flat object as above, with the value (and time)
// the full parser would give bit for bit; nullopt when the full parser must decide.
std::optional<ParsedSample> ScanFlatJson(std::string_view payload, const FlatJsonFields& fields,
                                         core::TimestampUs arrival);

}  // namespace nightjar::mqtt::internal
