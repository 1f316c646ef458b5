// How a FileRecord is stored outside the process.
//
// Two codings, for two readers:
//  - as a JSON array (record_to_json / record_from_json), inside the saved index
//    (index.cbor), where the layout should be readable by any CBOR tool;
//  - as fixed little-endian bytes (record_to_bytes / record_from_bytes), for the
//    record cache, where 70,000 rows must decode in milliseconds. The path, size,
//    modification time and inode are the cache's own columns, not in the bytes.
// Both decoders check every length, type and enum range: the JSON one throws
// std::runtime_error (or a json exception), the byte one returns false. Neither
// trusts its input.
#pragma once

#include <cstdint>
#include <span>
#include <vector>

#include <nlohmann/json.hpp>

#include "tamis/model/record.h"

namespace tamis::detail {

// `with_lookalike`: also the 8 DCT hashes (the index keeps only the groups they
// produced; thumbnails are not part of a record, see ThumbnailTable).
nlohmann::json record_to_json(const FileRecord& r, bool with_lookalike);
FileRecord record_from_json(const nlohmann::json& e);

// Byte layout (offsets in bytes, little-endian):
//   0 kind, 1 defect, 2 format, 3 colour mode, 4 bit depth (u8 each)
//   5 flags: bit 0 interlaced, 1 has_exif, 2 has_gps, 3 has_content_hash,
//            4 has_lookalike, 5 channels_equal (other bits zero)
//   6 orientation u8, 7 JPEG quality u8 (0-100; the orientation was a u16
//     until cache schema 7), 8 width u32, 12 height u32, 16 frames u32,
//   20 content hash (two u64), 36 luma mean, 40 luma std, 44 entropy, 48 focus (f32),
//   52 alpha_min u8, 53 distinct u8;
//   with has_lookalike: 54 the 8 DCT hashes (u64).
// The 32x32 thumbnail is not in these bytes: the cache keeps it apart (1,024 raw
// bytes), to be read only when needed.
inline constexpr size_t kRecordBytesHead = 54;
inline constexpr size_t kRecordBytesLookalike = kRecordBytesHead + 8 * kDihedralCount;
// Appends the record's bytes (head, plus the hashes for a look-alike record).
void record_to_bytes(const FileRecord& r, std::vector<uint8_t>& out);
// Fills every field but path, size, mtime_ns, inode and the thumbnail (zeroed);
// false when the bytes are not exactly one well-formed record (then `r` is
// unspecified).
bool record_from_bytes(std::span<const uint8_t> bytes, FileRecord& r);

}  // namespace tamis::detail
