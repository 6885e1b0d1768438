// Samples from MQTT payloads: one value per message, as plain text or inside JSON.
//
// The encoding is chosen per topic rule (PayloadFormat):
//
// kNumber — the whole payload is one number as text, e.g. "12.75", "-3e-2", " 41\n".
//   Accepted: ASCII whitespace around it (space, \t, \r, \n, \f, \v), an optional '+' or
//   '-', then decimal digits with an optional fraction and exponent, or nan, inf or
//   infinity in any letter case. Nothing else: no units, no thousands separators, no hex,
//   no second number. The sample time is the arrival time.
//
// kJson — the payload is one JSON object (RFC 8259). value_field names the value by a
//   dotted path of object keys: "value", "data.value" (a key holding '.' cannot be
//   reached; arrays are not indexed). The value may be
//     a JSON number,
//     a string holding a kNumber text ("12.5", "NaN"; gateways quote values they cannot
//       write as JSON numbers), or
//     null, read as NaN (gateways send null for a bad-quality reading).
//   time_field, when set, names the sample time the same way, written as time_encoding
//   says — configured, never guessed from the size of the number:
//     kIso8601       a string YYYY-MM-DDTHH:MM:SS[.f]Z or the same ending in +00:00: UTC
//                    only, 1 to 9 fraction digits (truncated to whole microseconds; the
//                    one parser, core::ParseUtcTimestamp in core/timestamp_format.h), the date
//                    must exist, no leap second (:60);
//     kEpochSeconds  a JSON number of seconds since 1970-01-01T00:00:00Z, fraction allowed;
//     kEpochMillis   a JSON number of milliseconds since then, fraction allowed.
//   Times must lie in the years 0000..9999. Without a time_field the sample time is the
//   arrival time.
//
// NaN and infinities are accepted and passed on, not rejected here: the engine's sensor
// health check flags non-finite values as a sensor alarm on the channel, which tells an
// operator more than a bad-payload count would.
//
// Payloads longer than max_payload_bytes are rejected before parsing.
//
// Errors start "topic <topic>: " and say what is wrong and where, e.g.
//   topic brackwater/cw2/pump_a/flow: field 'value' missing
//   topic brackwater/cw2/pump_a/flow: field 'data.value' is a boolean, want a number
//   topic brackwater/cw2/pump_a/flow: not JSON: parse error at line 1, column 9: ...
//   topic brackwater/cw2/pump_a/flow: payload 'abc' is not a number
//
// Nothing here reads a clock: the caller passes the arrival time.
// Thread-safety: a PayloadParser is immutable after Create(); Parse() is safe from any
// number of threads. Ownership: plain values.
#pragma once

#include <cstddef>
#include <string>
#include <string_view>
#include <vector>

#include "core/status.h"
#include "core/time.h"

namespace nightjar::mqtt {

enum class PayloadEncoding { kNumber, kJson };
enum class TimeEncoding { kIso8601, kEpochSeconds, kEpochMillis };

// "number", "json"; "iso8601", "epoch_s", "epoch_ms".
const char* PayloadEncodingName(PayloadEncoding encoding);
const char* TimeEncodingName(TimeEncoding encoding);

struct PayloadFormat {
  // How the payload is written. Default kNumber.
  PayloadEncoding encoding = PayloadEncoding::kNumber;
  // kJson only: dotted path of the value. Default "value".
  std::string value_field = "value";
  // kJson only: dotted path of the sample time; empty = the arrival time. Default empty.
  std::string time_field;
  // kJson with a time_field: how the time is written. Default kIso8601.
  TimeEncoding time_encoding = TimeEncoding::kIso8601;
  // Longest payload accepted, in bytes, 1..268435455 (MQTT's limit). Default 65536.
  std::size_t max_payload_bytes = 65536;
};

// OK, or InvalidArgument naming the field: an empty or malformed field path (empty key,
// e.g. "data..value"), a time_field with kNumber, max_payload_bytes out of range.
core::Status ValidatePayloadFormat(const PayloadFormat& format);

struct ParsedSample {
  core::TimestampUs time = 0;
  double value = 0.0;
};

class PayloadParser {
 public:
  // InvalidArgument from ValidatePayloadFormat when `format` is bad.
  static core::Result<PayloadParser> Create(PayloadFormat format);

  // The sample in `payload`, received on `topic` at `arrival`; InvalidArgument
  // "topic <topic>: ..." when the payload does not fit the format.
  // A kJson payload whose fields are single keys is first read by a scanner for flat
  // objects (mqtt/internal/flat_json.h), which gives up on anything it does not fully
  // understand; the full JSON parser decides those, so results and errors are the same.
  core::Result<ParsedSample> Parse(std::string_view topic, std::string_view payload,
                                   core::TimestampUs arrival) const;
  // Parse() without the flat-object scanner: every kJson payload goes through the full
  // JSON parser (what the differential test compares the scanner with).
  core::Result<ParsedSample> ParseWithFullJsonParser(std::string_view topic,
                                                     std::string_view payload,
                                                     core::TimestampUs arrival) const;

  const PayloadFormat& format() const { return format_; }

 private:
  PayloadParser() = default;

  PayloadFormat format_;
  std::vector<std::string> value_path_;  // value_field split at '.'
  std::vector<std::string> time_path_;   // time_field split at '.', empty if none
  bool flat_fields_ = false;             // kJson, value and time fields are single keys
};

// A kNumber text as described above. InvalidArgument quoting the text (shortened, control
// characters escaped), without a topic: callers add where it came from.
core::Result<double> ParseNumberText(std::string_view text);

// An ISO-8601 UTC time as described under kIso8601. InvalidArgument "bad timestamp '...':
// <reason>", without a topic.
core::Result<core::TimestampUs> ParseUtcTimestamp(std::string_view text);

}  // namespace nightjar::mqtt
