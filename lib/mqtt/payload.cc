#include "mqtt/payload.h"

#include <charconv>
#include <cmath>
#include <cstdint>
#include <limits>
#include <nlohmann/json.hpp>
#include <optional>
#include <system_error>
#include <utility>

#include "core/timestamp_format.h"
#include "mqtt/internal/flat_json.h"
#include "mqtt/internal/text.h"

namespace nightjar::mqtt {
namespace {

using Json = nlohmann::json;

constexpr std::size_t kMaxMqttPayload = 268'435'455;
// Seconds since the epoch of 0000-01-01T00:00:00Z and of 9999-12-31T23:59:59Z.
constexpr std::int64_t kMinEpochSeconds = -62'167'219'200;
constexpr std::int64_t kMaxEpochSeconds = 253'402'300'799;

bool IsSpace(char c) {
  return c == ' ' || c == '\t' || c == '\r' || c == '\n' || c == '\f' || c == '\v';
}

std::string_view Trim(std::string_view text) {
  while (!text.empty() && IsSpace(text.front())) text.remove_prefix(1);
  while (!text.empty() && IsSpace(text.back())) text.remove_suffix(1);
  return text;
}

std::string Quoted(std::string_view text) {
  std::string out = "'";  // appended piecewise: "'" + std::string trips GCC 12's -Wrestrict
  internal::AppendPrintable(text, internal::kMaxQuotedPayload, &out);
  out += '\'';
  return out;
}

// Splits a dotted field path; false if a key is empty (column of the fault in *column).
bool SplitPath(std::string_view path, std::vector<std::string>* keys, std::size_t* column) {
  keys->clear();
  std::size_t start = 0;
  while (true) {
    const std::size_t dot = path.find('.', start);
    const std::size_t end = dot == std::string_view::npos ? path.size() : dot;
    if (end == start) {
      *column = start + 1;
      return false;
    }
    keys->emplace_back(path.substr(start, end - start));
    if (dot == std::string_view::npos) return true;
    start = dot + 1;
  }
}

core::Status CheckPath(std::string_view name, std::string_view path,
                       std::vector<std::string>* keys) {
  std::size_t column = 0;
  if (path.empty()) return core::Status::InvalidArgument(std::string(name) + ": empty");
  if (!SplitPath(path, keys, &column)) {
    return core::Status::InvalidArgument(std::string(name) + " '" + std::string(path) +
                                         "': empty key at column " + std::to_string(column));
  }
  return core::Status::Ok();
}

// Finds the SAX parser's error position and text; only run on payloads that failed.
class ErrorFinder final : public nlohmann::json_sax<Json> {
 public:
  bool null() override { return true; }
  bool boolean(bool /*val*/) override { return true; }
  bool number_integer(number_integer_t /*val*/) override { return true; }
  bool number_unsigned(number_unsigned_t /*val*/) override { return true; }
  bool number_float(number_float_t /*val*/, const string_t& /*s*/) override { return true; }
  bool string(string_t& /*val*/) override { return true; }
  bool binary(binary_t& /*val*/) override { return true; }
  bool start_object(std::size_t /*elements*/) override { return true; }
  bool key(string_t& /*val*/) override { return true; }
  bool end_object() override { return true; }
  bool start_array(std::size_t /*elements*/) override { return true; }
  bool end_array() override { return true; }
  bool parse_error(std::size_t /*position*/, const std::string& /*last_token*/,
                   const nlohmann::detail::exception& ex) override {
    message_ = ex.what();
    return false;
  }
  const std::string& message() const { return message_; }

 private:
  std::string message_;
};

std::string JsonSyntaxError(std::string_view payload) {
  ErrorFinder finder;
  Json::sax_parse(payload.begin(), payload.end(), &finder);
  std::string what = finder.message();
  // "[json.exception.parse_error.101] parse error at line 1, column 9: ..." -> from "parse".
  if (const std::size_t bracket = what.find("] "); bracket != std::string::npos) {
    what.erase(0, bracket + 2);
  }
  if (what.empty()) what = "malformed JSON";
  return internal::Printable(what, 240);
}

// "a number", "an object", ... for error messages.
std::string Describe(const Json& node) {
  if (node.is_null()) return "null";
  if (node.is_boolean()) return "a boolean";
  if (node.is_number()) return "a number";
  if (node.is_string()) return "a string";
  if (node.is_array()) return "an array";
  if (node.is_object()) return "an object";
  return "binary";
}

std::string DottedPath(const std::vector<std::string>& keys, std::size_t count) {
  std::string out;
  for (std::size_t i = 0; i < count; ++i) {
    if (i > 0) out += '.';
    out += keys[i];
  }
  return out;
}

// The node at `keys` in `root`, or an error naming the field `name`.
core::Result<const Json*> Find(const Json& root, const std::vector<std::string>& keys,
                               std::string_view topic) {
  const Json* node = &root;
  for (std::size_t i = 0; i < keys.size(); ++i) {
    const std::string field = "field '" + DottedPath(keys, keys.size()) + "'";
    if (!node->is_object()) {
      return core::Status::InvalidArgument(internal::TopicPrefix(topic) + field + ": '" +
                                           DottedPath(keys, i) + "' is " + Describe(*node) +
                                           ", not an object");
    }
    const auto it = node->find(keys[i]);
    if (it == node->end()) {
      return core::Status::InvalidArgument(internal::TopicPrefix(topic) + field + " missing");
    }
    node = &*it;
  }
  return node;
}

core::Result<core::TimestampUs> EpochToMicros(const Json& node, TimeEncoding encoding,
                                              const std::string& where) {
  const std::int64_t per_unit = encoding == TimeEncoding::kEpochSeconds ? 1'000'000 : 1'000;
  const std::int64_t min_units =
      encoding == TimeEncoding::kEpochSeconds ? kMinEpochSeconds : kMinEpochSeconds * 1000;
  const std::int64_t max_units =
      encoding == TimeEncoding::kEpochSeconds ? kMaxEpochSeconds : kMaxEpochSeconds * 1000 + 999;
  const std::string range =
      std::string(" outside years 0000..9999 (time_encoding ") + TimeEncodingName(encoding) + ")";
  if (node.is_number_unsigned()) {
    const auto units = node.get<std::uint64_t>();
    if (units > static_cast<std::uint64_t>(max_units)) {
      return core::Status::InvalidArgument(where + " " + node.dump() + range);
    }
    return static_cast<std::int64_t>(units) * per_unit;
  }
  if (node.is_number_integer()) {
    const auto units = node.get<std::int64_t>();
    if (units < min_units || units > max_units) {
      return core::Status::InvalidArgument(where + " " + node.dump() + range);
    }
    return units * per_unit;
  }
  const auto units = node.get<double>();
  if (!(units >= static_cast<double>(min_units) && units <= static_cast<double>(max_units))) {
    return core::Status::InvalidArgument(where + " " + node.dump() + range);
  }
  return static_cast<core::TimestampUs>(std::llround(units * static_cast<double>(per_unit)));
}

}  // namespace

const char* PayloadEncodingName(PayloadEncoding encoding) {
  switch (encoding) {
    case PayloadEncoding::kNumber:
      return "number";
    case PayloadEncoding::kJson:
      return "json";
  }
  return "?";
}

const char* TimeEncodingName(TimeEncoding encoding) {
  switch (encoding) {
    case TimeEncoding::kIso8601:
      return "iso8601";
    case TimeEncoding::kEpochSeconds:
      return "epoch_s";
    case TimeEncoding::kEpochMillis:
      return "epoch_ms";
  }
  return "?";
}

core::Status ValidatePayloadFormat(const PayloadFormat& format) {
  if (format.max_payload_bytes < 1 || format.max_payload_bytes > kMaxMqttPayload) {
    return core::Status::InvalidArgument("max_payload_bytes: must be in 1..268435455, got " +
                                         std::to_string(format.max_payload_bytes));
  }
  if (format.encoding == PayloadEncoding::kNumber) {
    if (!format.time_field.empty()) {
      return core::Status::InvalidArgument(
          "time_field: a plain number payload has no fields (set encoding json, or leave "
          "time_field empty to use the arrival time)");
    }
    return core::Status::Ok();
  }
  std::vector<std::string> keys;
  if (core::Status s = CheckPath("value_field", format.value_field, &keys); !s.ok()) return s;
  if (!format.time_field.empty()) {
    if (core::Status s = CheckPath("time_field", format.time_field, &keys); !s.ok()) return s;
  }
  return core::Status::Ok();
}

core::Result<PayloadParser> PayloadParser::Create(PayloadFormat format) {
  if (core::Status s = ValidatePayloadFormat(format); !s.ok()) return s;
  PayloadParser parser;
  std::size_t column = 0;
  if (format.encoding == PayloadEncoding::kJson) {
    SplitPath(format.value_field, &parser.value_path_, &column);
    if (!format.time_field.empty()) SplitPath(format.time_field, &parser.time_path_, &column);
    parser.flat_fields_ = parser.value_path_.size() == 1 && parser.time_path_.size() <= 1;
  }
  parser.format_ = std::move(format);
  return parser;
}

core::Result<ParsedSample> PayloadParser::Parse(std::string_view topic, std::string_view payload,
                                                core::TimestampUs arrival) const {
  if (flat_fields_ && payload.size() <= format_.max_payload_bytes) {
    const internal::FlatJsonFields fields{.value_key = format_.value_field,
                                          .time_key = format_.time_field,
                                          .time_encoding = format_.time_encoding};
    if (std::optional<ParsedSample> sample = internal::ScanFlatJson(payload, fields, arrival)) {
      return *sample;
    }
  }
  return ParseWithFullJsonParser(topic, payload, arrival);
}

core::Result<ParsedSample> PayloadParser::ParseWithFullJsonParser(std::string_view topic,
                                                                  std::string_view payload,
                                                                  core::TimestampUs arrival) const {
  if (payload.size() > format_.max_payload_bytes) {
    return core::Status::InvalidArgument(
        internal::TopicPrefix(topic) + "payload of " + std::to_string(payload.size()) +
        " bytes is longer than max_payload_bytes " + std::to_string(format_.max_payload_bytes));
  }
  if (format_.encoding == PayloadEncoding::kNumber) {
    core::Result<double> value = ParseNumberText(payload);
    if (!value.ok()) {
      return core::Status::InvalidArgument(internal::TopicPrefix(topic) + value.status().message());
    }
    return ParsedSample{.time = arrival, .value = *value};
  }

  const Json root = Json::parse(payload.begin(), payload.end(), nullptr,
                                /*allow_exceptions=*/false);
  if (root.is_discarded()) {
    return core::Status::InvalidArgument(internal::TopicPrefix(topic) +
                                         "not JSON: " + JsonSyntaxError(payload));
  }
  if (!root.is_object()) {
    return core::Status::InvalidArgument(internal::TopicPrefix(topic) + "payload is a JSON " +
                                         root.type_name() + ", want an object");
  }

  ParsedSample sample{.time = arrival, .value = 0.0};
  core::Result<const Json*> value_node = Find(root, value_path_, topic);
  if (!value_node.ok()) return value_node.status();
  const Json& value = **value_node;
  const std::string value_where =
      internal::TopicPrefix(topic) + "field '" + format_.value_field + "'";
  if (value.is_number()) {
    sample.value = value.get<double>();
  } else if (value.is_null()) {
    sample.value = std::numeric_limits<double>::quiet_NaN();
  } else if (value.is_string()) {
    core::Result<double> parsed = ParseNumberText(value.get_ref<const std::string&>());
    if (!parsed.ok()) {
      return core::Status::InvalidArgument(value_where + ": " + parsed.status().message());
    }
    sample.value = *parsed;
  } else {
    return core::Status::InvalidArgument(value_where + " is " + Describe(value) +
                                         ", want a number");
  }

  if (!time_path_.empty()) {
    core::Result<const Json*> time_node = Find(root, time_path_, topic);
    if (!time_node.ok()) return time_node.status();
    const Json& time = **time_node;
    const std::string time_where =
        internal::TopicPrefix(topic) + "field '" + format_.time_field + "'";
    if (format_.time_encoding == TimeEncoding::kIso8601) {
      if (!time.is_string()) {
        return core::Status::InvalidArgument(time_where + " is " + Describe(time) +
                                             ", want an ISO-8601 UTC string (time_encoding "
                                             "iso8601)");
      }
      core::Result<core::TimestampUs> t = ParseUtcTimestamp(time.get_ref<const std::string&>());
      if (!t.ok()) return core::Status::InvalidArgument(time_where + ": " + t.status().message());
      sample.time = *t;
    } else {
      if (!time.is_number()) {
        return core::Status::InvalidArgument(time_where + " is " + Describe(time) +
                                             ", want a number (time_encoding " +
                                             TimeEncodingName(format_.time_encoding) + ")");
      }
      core::Result<core::TimestampUs> t = EpochToMicros(time, format_.time_encoding, time_where);
      if (!t.ok()) return t.status();
      sample.time = *t;
    }
  }
  return sample;
}

core::Result<double> ParseNumberText(std::string_view text) {
  const std::string_view number = Trim(text);
  if (number.empty()) {
    return core::Status::InvalidArgument(text.empty() ? "payload is empty, want a number"
                                                      : "payload is blank, want a number");
  }
  std::string_view digits = number;
  if (digits.front() == '+') {
    digits.remove_prefix(1);
    if (digits.empty() || digits.front() == '-' || digits.front() == '+') {
      return core::Status::InvalidArgument("payload " + Quoted(text) + " is not a number");
    }
  }
  double value = 0.0;
  const char* first = digits.data();
  const char* last = digits.data() + digits.size();
  const std::from_chars_result result =
      std::from_chars(first, last, value, std::chars_format::general);
  if (result.ec == std::errc::result_out_of_range && result.ptr == last) {
    return core::Status::InvalidArgument("payload " + Quoted(text) +
                                         " is out of the range of a double");
  }
  if (result.ec != std::errc() || result.ptr != last) {
    return core::Status::InvalidArgument("payload " + Quoted(text) + " is not a number");
  }
  return value;
}

core::Result<core::TimestampUs> ParseUtcTimestamp(std::string_view text) {
  core::Result<core::TimestampUs> parsed = core::ParseUtcTimestamp(text);
  if (!parsed.ok()) {
    return core::Status::InvalidArgument("bad timestamp " + Quoted(text) + ": " +
                                         parsed.status().message());
  }
  return parsed;
}

}  // namespace nightjar::mqtt
