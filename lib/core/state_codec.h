// Little-endian byte writer and bounds-checked reader for checkpoints (channel_state.h).
//
// StateWriter appends fixed-width little-endian integers and IEEE-754 floats (bit
// patterns, so NaN payloads and -0 survive) to a caller's vector. StateReader reads them
// back from a borrowed span; every read checks the bytes remaining and returns a Status
// (kDataLoss, "truncated at byte N") instead of reading past the end. The first failure
// sticks: later reads fail too and status() keeps the first message.
// Thread-safety: none; one writer or reader per thread. Ownership: the writer borrows
// its vector, the reader its span; both must outlive them.
#pragma once

#include <cstddef>
#include <cstdint>
#include <span>
#include <string>
#include <string_view>
#include <vector>

#include "core/status.h"

namespace nightjar::core {

class StateWriter {
 public:
  explicit StateWriter(std::vector<std::uint8_t>& out) : out_(out) {}

  void U8(std::uint8_t value) { out_.push_back(value); }
  void U32(std::uint32_t value);
  void U64(std::uint64_t value);
  void I64(std::int64_t value) { U64(static_cast<std::uint64_t>(value)); }
  void F32(float value);
  void F64(double value);
  void Bytes(std::span<const std::uint8_t> bytes);
  // n values in a row, as F32/F64 would write them one by one (one copy on LE hosts).
  void F32s(const float* values, std::size_t n);
  void F64s(const double* values, std::size_t n);
  void String(std::string_view text);  // u32 length, then the bytes

  // Overwrites 8 bytes at `offset` (already written), e.g. a length known only later.
  void PatchU64(std::size_t offset, std::uint64_t value);
  std::size_t size() const { return out_.size(); }

 private:
  std::vector<std::uint8_t>& out_;
};

class StateReader {
 public:
  explicit StateReader(std::span<const std::uint8_t> bytes) : bytes_(bytes) {}

  Status U8(std::uint8_t* value);
  Status U32(std::uint32_t* value);
  Status U64(std::uint64_t* value);
  Status I64(std::int64_t* value);
  Status F32(float* value);
  Status F64(double* value);
  Status F32s(float* values, std::size_t n);
  Status F64s(double* values, std::size_t n);
  // u32 length then bytes; fails if the length runs past the end or exceeds max_length.
  Status String(std::string* text, std::uint32_t max_length);

  // Records a failure found by the caller (a value out of its range); first one sticks.
  void Fail(Status status);

  bool ok() const { return status_.ok(); }
  const Status& status() const { return status_; }
  std::size_t position() const { return position_; }
  std::size_t remaining() const { return ok() ? bytes_.size() - position_ : 0; }

 private:
  // Bytes [position_, position_ + n) or null (and a sticky error) if fewer remain.
  const std::uint8_t* Take(std::size_t n);

  std::span<const std::uint8_t> bytes_;
  std::size_t position_ = 0;
  Status status_;
};

}  // namespace nightjar::core
