#include "core/crc32.h"

#include <array>
#include <cstddef>

namespace nightjar::core {
namespace {

// Slicing-by-8: table[0] is the classic byte-at-a-time table; table[k] advances a byte
// that is k positions further back, so eight bytes cost eight look-ups and no shifts in
// between (checkpoints are tens of kilobytes; one table made the CRC most of a save).
using Tables = std::array<std::array<std::uint32_t, 256>, 8>;

constexpr Tables MakeTables() {
  Tables t{};
  for (std::uint32_t n = 0; n < 256; ++n) {
    std::uint32_t c = n;
    for (int k = 0; k < 8; ++k) c = (c & 1U) != 0 ? 0xEDB88320U ^ (c >> 1) : c >> 1;
    t[0][n] = c;
  }
  for (std::size_t k = 1; k < 8; ++k) {
    for (std::size_t n = 0; n < 256; ++n) {
      t[k][n] = (t[k - 1][n] >> 8) ^ t[0][t[k - 1][n] & 0xFFU];
    }
  }
  return t;
}

constexpr Tables kTables = MakeTables();

std::uint32_t Load32(const std::uint8_t* p) {
  return static_cast<std::uint32_t>(p[0]) | static_cast<std::uint32_t>(p[1]) << 8 |
         static_cast<std::uint32_t>(p[2]) << 16 | static_cast<std::uint32_t>(p[3]) << 24;
}

}  // namespace

std::uint32_t Crc32(std::span<const std::uint8_t> bytes, std::uint32_t crc) {
  std::uint32_t c = crc ^ 0xFFFFFFFFU;
  const std::uint8_t* p = bytes.data();
  std::size_t n = bytes.size();
  for (; n >= 8; n -= 8, p += 8) {
    const std::uint32_t one = Load32(p) ^ c;
    const std::uint32_t two = Load32(p + 4);
    c = kTables[7][one & 0xFFU] ^ kTables[6][(one >> 8) & 0xFFU] ^ kTables[5][(one >> 16) & 0xFFU] ^
        kTables[4][one >> 24] ^ kTables[3][two & 0xFFU] ^ kTables[2][(two >> 8) & 0xFFU] ^
        kTables[1][(two >> 16) & 0xFFU] ^ kTables[0][two >> 24];
  }
  for (; n > 0; --n, ++p) c = kTables[0][(c ^ *p) & 0xFFU] ^ (c >> 8);
  return c ^ 0xFFFFFFFFU;
}

}  // namespace nightjar::core
