// CRC-32 as used by zlib, gzip and PNG (CRC-32/ISO-HDLC: reflected polynomial 0xEDB88320,
// initial value and final XOR 0xFFFFFFFF), computed with our own tables (slicing-by-8).
//
// Pure function; thread-safe (the table is a constant built at compile time). Chaining
// is zlib-compatible: Crc32(b, Crc32(a)) == Crc32(a followed by b).
#pragma once

#include <cstdint>
#include <span>

namespace nightjar::core {

std::uint32_t Crc32(std::span<const std::uint8_t> bytes, std::uint32_t crc = 0);

}  // namespace nightjar::core
