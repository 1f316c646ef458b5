#include "tamis/read/exif.h"

#include "tamis/base/byte_reader.h"

namespace tamis {

using namespace detail;

namespace {
constexpr uint16_t kTagOrientation = 0x0112;
constexpr uint16_t kTagGpsIfd = 0x8825;
constexpr uint16_t kGpsLatitude = 0x0002;
constexpr uint16_t kGpsLongitude = 0x0004;
constexpr uint16_t kTypeShort = 3;
constexpr uint16_t kTypeLong = 4;
constexpr uint16_t kMaxEntries = 4096;  // far more than any real IFD; bounds the work
}  // namespace

ExifFacts read_exif(std::span<const uint8_t> b) {
  ExifFacts out;
  bool little;
  if (starts_with(b, 0, "II", 2)) {
    little = true;
  } else if (starts_with(b, 0, "MM", 2)) {
    little = false;
  } else {
    return out;
  }
  auto magic = rd16(b, 2, little);
  auto ifd0 = rd32(b, 4, little);
  if (!magic || *magic != 42 || !ifd0) return out;
  auto count = rd16(b, *ifd0, little);
  if (!count || *count > kMaxEntries || !has(b, *ifd0 + 2, size_t{*count} * 12)) return out;
  out.valid = true;
  uint32_t gps_offset = 0;
  for (uint32_t i = 0; i < *count; ++i) {
    size_t e = *ifd0 + 2 + size_t{i} * 12;
    uint16_t tag = *rd16(b, e, little);
    uint16_t type = *rd16(b, e + 2, little);
    if (tag == kTagOrientation && type == kTypeShort) {
      uint16_t v = *rd16(b, e + 8, little);  // a SHORT value sits left-aligned in the field
      out.orientation = (v >= 1 && v <= 8) ? v : 0;
    } else if (tag == kTagGpsIfd && (type == kTypeLong || type == 13 /* IFD */)) {
      out.gps_ifd = true;
      gps_offset = *rd32(b, e + 8, little);
    }
  }
  if (out.gps_ifd) {
    auto gcount = rd16(b, gps_offset, little);
    if (gcount && *gcount <= kMaxEntries && has(b, gps_offset + 2, size_t{*gcount} * 12)) {
      for (uint32_t i = 0; i < *gcount; ++i) {
        uint16_t tag = *rd16(b, gps_offset + 2 + size_t{i} * 12, little);
        if (tag == kGpsLatitude || tag == kGpsLongitude) out.gps_position = true;
      }
    }
  }
  return out;
}

}  // namespace tamis
