// Bounds-checked reads from a byte span. Every read either succeeds inside the
// span or reports failure; nothing here can read past the end.
#pragma once

#include <cstddef>
#include <cstdint>
#include <cstring>
#include <optional>
#include <span>

namespace tamis::detail {

using Bytes = std::span<const uint8_t>;

inline bool has(Bytes b, size_t off, size_t n) { return off <= b.size() && n <= b.size() - off; }

inline std::optional<uint16_t> be16(Bytes b, size_t off) {
  if (!has(b, off, 2)) return std::nullopt;
  return static_cast<uint16_t>((b[off] << 8) | b[off + 1]);
}
inline std::optional<uint32_t> be32(Bytes b, size_t off) {
  if (!has(b, off, 4)) return std::nullopt;
  return (uint32_t{b[off]} << 24) | (uint32_t{b[off + 1]} << 16) | (uint32_t{b[off + 2]} << 8) |
         uint32_t{b[off + 3]};
}
inline std::optional<uint16_t> le16(Bytes b, size_t off) {
  if (!has(b, off, 2)) return std::nullopt;
  return static_cast<uint16_t>(b[off] | (b[off + 1] << 8));
}
inline std::optional<uint32_t> le24(Bytes b, size_t off) {
  if (!has(b, off, 3)) return std::nullopt;
  return uint32_t{b[off]} | (uint32_t{b[off + 1]} << 8) | (uint32_t{b[off + 2]} << 16);
}
inline std::optional<uint32_t> le32(Bytes b, size_t off) {
  if (!has(b, off, 4)) return std::nullopt;
  return uint32_t{b[off]} | (uint32_t{b[off + 1]} << 8) | (uint32_t{b[off + 2]} << 16) |
         (uint32_t{b[off + 3]} << 24);
}
// 16/32-bit reads in a chosen byte order (TIFF and EXIF carry their own).
inline std::optional<uint16_t> rd16(Bytes b, size_t off, bool little) {
  return little ? le16(b, off) : be16(b, off);
}
inline std::optional<uint32_t> rd32(Bytes b, size_t off, bool little) {
  return little ? le32(b, off) : be32(b, off);
}
inline bool starts_with(Bytes b, size_t off, const char* lit, size_t n) {
  return has(b, off, n) && std::memcmp(b.data() + off, lit, n) == 0;
}

}  // namespace tamis::detail
