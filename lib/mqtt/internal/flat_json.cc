#include "mqtt/internal/flat_json.h"

#include <charconv>
#include <cmath>
#include <cstdint>
#include <limits>
#include <system_error>

#include "core/timestamp_format.h"

namespace nightjar::mqtt::internal {
namespace {

// Seconds since the epoch of 0000-01-01T00:00:00Z and of 9999-12-31T23:59:59Z, as in the
// full path (payload.cc).
constexpr std::int64_t kMinEpochSeconds = -62'167'219'200;
constexpr std::int64_t kMaxEpochSeconds = 253'402'300'799;
// Integers up to 18 digits fit an int64 whatever their sign; longer ones the full parser
// may read as a float or reject, so they are left to it.
constexpr std::size_t kMaxIntegerDigits = 18;

enum class Kind { kNumber, kString, kLiteral, kNull };

struct Token {
  Kind kind = Kind::kNull;
  std::string_view text;   // a number's text, a string's content (no quotes)
  bool integer = false;    // a number without fraction or exponent
  double number = 0.0;     // a number's value, as the full parser reads it
  std::int64_t units = 0;  // an integer's value
};

bool IsJsonSpace(char c) { return c == ' ' || c == '\t' || c == '\n' || c == '\r'; }
bool IsDigit(char c) { return c >= '0' && c <= '9'; }

class Scanner {
 public:
  explicit Scanner(std::string_view text) : p_(text.data()), end_(text.data() + text.size()) {}

  void SkipSpace() {
    while (p_ != end_ && IsJsonSpace(*p_)) ++p_;
  }
  bool Consume(char c) {
    if (p_ == end_ || *p_ != c) return false;
    ++p_;
    return true;
  }
  bool AtEnd() const { return p_ == end_; }
  char Peek() const { return p_ == end_ ? '\0' : *p_; }

  // After the opening quote: the content up to the closing quote, which is consumed.
  // False for an escape, a control byte or a byte >= 0x80 (left to the full parser).
  bool ReadString(std::string_view* out) {
    const char* start = p_;
    while (p_ != end_) {
      const auto c = static_cast<unsigned char>(*p_);
      if (c == '"') {
        *out = std::string_view(start, static_cast<std::size_t>(p_ - start));
        ++p_;
        return true;
      }
      if (c == '\\' || c < 0x20 || c >= 0x80) return false;
      ++p_;
    }
    return false;
  }

  // A number by RFC 8259's grammar, converted as the full parser converts it.
  bool ReadNumber(Token* token) {
    const char* start = p_;
    if (p_ != end_ && *p_ == '-') ++p_;
    const char* digits = p_;
    if (p_ == end_) return false;
    if (*p_ == '0') {
      ++p_;
    } else if (*p_ >= '1' && *p_ <= '9') {
      while (p_ != end_ && IsDigit(*p_)) ++p_;
    } else {
      return false;
    }
    const auto integer_digits = static_cast<std::size_t>(p_ - digits);
    token->integer = true;
    if (p_ != end_ && *p_ == '.') {
      ++p_;
      if (p_ == end_ || !IsDigit(*p_)) return false;
      while (p_ != end_ && IsDigit(*p_)) ++p_;
      token->integer = false;
    }
    if (p_ != end_ && (*p_ == 'e' || *p_ == 'E')) {
      ++p_;
      if (p_ != end_ && (*p_ == '+' || *p_ == '-')) ++p_;
      if (p_ == end_ || !IsDigit(*p_)) return false;
      while (p_ != end_ && IsDigit(*p_)) ++p_;
      token->integer = false;
    }
    token->kind = Kind::kNumber;
    token->text = std::string_view(start, static_cast<std::size_t>(p_ - start));
    if (token->integer) {
      if (integer_digits > kMaxIntegerDigits) return false;
      const std::from_chars_result r = std::from_chars(start, p_, token->units);
      if (r.ec != std::errc() || r.ptr != p_) return false;
      // The full parser holds an integer as int64 or uint64 and converts it to double.
      token->number = static_cast<double>(token->units);
      return true;
    }
    // Overflow is an error there, underflow is not; both are left to it.
    const std::from_chars_result r =
        std::from_chars(start, p_, token->number, std::chars_format::general);
    return r.ec == std::errc() && r.ptr == p_ && std::isfinite(token->number);
  }

  bool ReadWord(std::string_view word) {
    if (static_cast<std::size_t>(end_ - p_) < word.size()) return false;
    if (std::string_view(p_, word.size()) != word) return false;
    p_ += word.size();
    return true;
  }

  // One member value; false where the fast path gives up.
  bool ReadValue(Token* token) {
    switch (Peek()) {
      case '"':
        ++p_;
        token->kind = Kind::kString;
        return ReadString(&token->text);
      case 't':
        token->kind = Kind::kLiteral;
        return ReadWord("true");
      case 'f':
        token->kind = Kind::kLiteral;
        return ReadWord("false");
      case 'n':
        token->kind = Kind::kNull;
        return ReadWord("null");
      default:
        return ReadNumber(token);
    }
  }

 private:
  const char* p_;
  const char* end_;
};

std::optional<double> ValueOf(const Token& token) {
  switch (token.kind) {
    case Kind::kNumber:
      return token.number;
    case Kind::kNull:
      return std::numeric_limits<double>::quiet_NaN();
    case Kind::kString: {
      const core::Result<double> parsed = ParseNumberText(token.text);
      if (!parsed.ok()) return std::nullopt;
      return *parsed;
    }
    case Kind::kLiteral:
      return std::nullopt;
  }
  return std::nullopt;
}

std::optional<core::TimestampUs> TimeOf(const Token& token, TimeEncoding encoding) {
  if (encoding == TimeEncoding::kIso8601) {
    if (token.kind != Kind::kString) return std::nullopt;
    const core::Result<core::TimestampUs> t = core::ParseUtcTimestamp(token.text);
    if (!t.ok()) return std::nullopt;
    return *t;
  }
  if (token.kind != Kind::kNumber) return std::nullopt;
  const bool seconds = encoding == TimeEncoding::kEpochSeconds;
  const std::int64_t per_unit = seconds ? 1'000'000 : 1'000;
  const std::int64_t min_units = seconds ? kMinEpochSeconds : kMinEpochSeconds * 1000;
  const std::int64_t max_units = seconds ? kMaxEpochSeconds : kMaxEpochSeconds * 1000 + 999;
  if (token.integer) {
    if (token.units < min_units || token.units > max_units) return std::nullopt;
    return token.units * per_unit;
  }
  const double units = token.number;
  if (!(units >= static_cast<double>(min_units) && units <= static_cast<double>(max_units))) {
    return std::nullopt;
  }
  return static_cast<core::TimestampUs>(std::llround(units * static_cast<double>(per_unit)));
}

}  // namespace

std::optional<ParsedSample> ScanFlatJson(std::string_view payload, const FlatJsonFields& fields,
                                         core::TimestampUs arrival) {
  Scanner scan(payload);
  scan.SkipSpace();
  if (!scan.Consume('{')) return std::nullopt;
  scan.SkipSpace();
  Token value;
  Token time;
  bool seen_value = false;
  bool seen_time = false;
  const bool wants_time = !fields.time_key.empty();
  if (scan.Peek() != '}') {
    while (true) {
      std::string_view key;
      if (!scan.Consume('"') || !scan.ReadString(&key)) return std::nullopt;
      scan.SkipSpace();
      if (!scan.Consume(':')) return std::nullopt;
      scan.SkipSpace();
      Token token;
      if (!scan.ReadValue(&token)) return std::nullopt;
      if (key == fields.value_key) {
        if (seen_value) return std::nullopt;  // the full parser keeps the last one
        seen_value = true;
        value = token;
      }
      if (wants_time && key == fields.time_key) {
        if (seen_time) return std::nullopt;
        seen_time = true;
        time = token;
      }
      scan.SkipSpace();
      if (scan.Consume(',')) {
        scan.SkipSpace();
        continue;
      }
      if (scan.Peek() == '}') break;
      return std::nullopt;
    }
  }
  scan.Consume('}');
  scan.SkipSpace();
  if (!scan.AtEnd() || !seen_value || (wants_time && !seen_time)) return std::nullopt;

  const std::optional<double> v = ValueOf(value);
  if (!v) return std::nullopt;
  ParsedSample sample{.time = arrival, .value = *v};
  if (wants_time) {
    const std::optional<core::TimestampUs> t = TimeOf(time, fields.time_encoding);
    if (!t) return std::nullopt;
    sample.time = *t;
  }
  return sample;
}

}  // namespace nightjar::mqtt::internal
