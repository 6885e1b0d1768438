#include "core/state_codec.h"

#include <bit>
#include <cstring>
#include <utility>

namespace nightjar::core {

void StateWriter::U32(std::uint32_t value) {
  for (int i = 0; i < 4; ++i) out_.push_back(static_cast<std::uint8_t>(value >> (8 * i)));
}

void StateWriter::U64(std::uint64_t value) {
  for (int i = 0; i < 8; ++i) out_.push_back(static_cast<std::uint8_t>(value >> (8 * i)));
}

void StateWriter::F32(float value) { U32(std::bit_cast<std::uint32_t>(value)); }

void StateWriter::F64(double value) { U64(std::bit_cast<std::uint64_t>(value)); }

void StateWriter::Bytes(std::span<const std::uint8_t> bytes) {
  out_.insert(out_.end(), bytes.begin(), bytes.end());
}

namespace {
template <typename T, typename Bits>
void AppendValues(std::vector<std::uint8_t>& out, const T* values, std::size_t n) {
  const std::size_t at = out.size();
  out.resize(at + n * sizeof(T));
  if constexpr (std::endian::native == std::endian::little) {
    if (n > 0) std::memcpy(out.data() + at, values, n * sizeof(T));
  } else {
    for (std::size_t i = 0; i < n; ++i) {
      const auto bits = std::bit_cast<Bits>(values[i]);
      for (std::size_t b = 0; b < sizeof(T); ++b) {
        out[at + i * sizeof(T) + b] = static_cast<std::uint8_t>(bits >> (8 * b));
      }
    }
  }
}

template <typename T, typename Bits>
void ReadValues(const std::uint8_t* at, T* values, std::size_t n) {
  if constexpr (std::endian::native == std::endian::little) {
    if (n > 0) std::memcpy(values, at, n * sizeof(T));
  } else {
    for (std::size_t i = 0; i < n; ++i) {
      Bits bits = 0;
      for (std::size_t b = 0; b < sizeof(T); ++b) {
        bits |= static_cast<Bits>(at[i * sizeof(T) + b]) << (8 * b);
      }
      values[i] = std::bit_cast<T>(bits);
    }
  }
}
}  // namespace

void StateWriter::F32s(const float* values, std::size_t n) {
  AppendValues<float, std::uint32_t>(out_, values, n);
}

void StateWriter::F64s(const double* values, std::size_t n) {
  AppendValues<double, std::uint64_t>(out_, values, n);
}

Status StateReader::F32s(float* values, std::size_t n) {
  // Checked before multiplying, so a huge n cannot wrap around.
  const std::size_t left = bytes_.size() - position_;
  const std::uint8_t* at = Take(n > left / sizeof(float) ? left + 1 : n * sizeof(float));
  if (at == nullptr) return status_;
  ReadValues<float, std::uint32_t>(at, values, n);
  return Status::Ok();
}

Status StateReader::F64s(double* values, std::size_t n) {
  // Checked before multiplying, so a huge n cannot wrap around.
  const std::size_t left = bytes_.size() - position_;
  const std::uint8_t* at = Take(n > left / sizeof(double) ? left + 1 : n * sizeof(double));
  if (at == nullptr) return status_;
  ReadValues<double, std::uint64_t>(at, values, n);
  return Status::Ok();
}

void StateWriter::String(std::string_view text) {
  U32(static_cast<std::uint32_t>(text.size()));
  for (const char c : text) out_.push_back(static_cast<std::uint8_t>(c));
}

void StateWriter::PatchU64(std::size_t offset, std::uint64_t value) {
  for (std::size_t i = 0; i < 8 && offset + i < out_.size(); ++i) {
    out_[offset + i] = static_cast<std::uint8_t>(value >> (8 * i));
  }
}

const std::uint8_t* StateReader::Take(std::size_t n) {
  if (!status_.ok()) return nullptr;
  if (n > bytes_.size() - position_) {
    status_ = Status::DataLoss("truncated at byte " + std::to_string(bytes_.size()) + ": needed " +
                               std::to_string(n) + " more at byte " + std::to_string(position_));
    return nullptr;
  }
  const std::uint8_t* at = bytes_.data() + position_;
  position_ += n;
  return at;
}

Status StateReader::U8(std::uint8_t* value) {
  const std::uint8_t* at = Take(1);
  if (at == nullptr) return status_;
  *value = *at;
  return Status::Ok();
}

Status StateReader::U32(std::uint32_t* value) {
  const std::uint8_t* at = Take(4);
  if (at == nullptr) return status_;
  std::uint32_t v = 0;
  for (int i = 0; i < 4; ++i) v |= static_cast<std::uint32_t>(at[i]) << (8 * i);
  *value = v;
  return Status::Ok();
}

Status StateReader::U64(std::uint64_t* value) {
  const std::uint8_t* at = Take(8);
  if (at == nullptr) return status_;
  std::uint64_t v = 0;
  for (int i = 0; i < 8; ++i) v |= static_cast<std::uint64_t>(at[i]) << (8 * i);
  *value = v;
  return Status::Ok();
}

Status StateReader::I64(std::int64_t* value) {
  std::uint64_t raw = 0;
  if (Status s = U64(&raw); !s.ok()) return s;
  *value = static_cast<std::int64_t>(raw);
  return Status::Ok();
}

Status StateReader::F32(float* value) {
  std::uint32_t raw = 0;
  if (Status s = U32(&raw); !s.ok()) return s;
  *value = std::bit_cast<float>(raw);
  return Status::Ok();
}

Status StateReader::F64(double* value) {
  std::uint64_t raw = 0;
  if (Status s = U64(&raw); !s.ok()) return s;
  *value = std::bit_cast<double>(raw);
  return Status::Ok();
}

Status StateReader::String(std::string* text, std::uint32_t max_length) {
  std::uint32_t length = 0;
  if (Status s = U32(&length); !s.ok()) return s;
  if (length > max_length) {
    Fail(Status::DataLoss("string of " + std::to_string(length) + " bytes at byte " +
                          std::to_string(position_ - 4) + " is longer than " +
                          std::to_string(max_length)));
    return status_;
  }
  const std::uint8_t* at = Take(length);
  if (at == nullptr) return status_;
  text->assign(reinterpret_cast<const char*>(at), length);
  return Status::Ok();
}

void StateReader::Fail(Status status) {
  if (status_.ok()) status_ = std::move(status);
}

}  // namespace nightjar::core
