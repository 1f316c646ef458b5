// EXIF reading: the few facts tamis needs from a TIFF-structured EXIF block.
//
// Takes the bytes of a TIFF structure (what follows "Exif\0\0" in a JPEG APP1
// segment, a PNG eXIf chunk, a WebP EXIF chunk, or a whole TIFF file) and reads
// IFD0's Orientation (tag 0x0112) and whether the GPS IFD (pointer tag 0x8825)
// holds a position (GPSLatitude 0x0002 or GPSLongitude 0x0004), following the
// layout of EXIF 2.32 (CIPA DC-008). Coordinates are never read or kept.
// Every offset is bounds-checked; a malformed block yields `valid == false`
// and never reads outside the span. Pure function, thread-safe.
#pragma once

#include <cstdint>
#include <span>

namespace tamis {

struct ExifFacts {
  bool valid = false;        // the TIFF header and IFD0 could be read
  uint16_t orientation = 0;  // 1..8, 0 when absent or out of range
  bool gps_ifd = false;      // a GPS IFD pointer is present
  bool gps_position = false; // the GPS IFD holds a latitude or longitude tag
};

ExifFacts read_exif(std::span<const uint8_t> tiff);

}  // namespace tamis
