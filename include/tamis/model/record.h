// The per-file record: what every stage knows about one regular file under ROOT.
//
// A FileRecord is created by the walk (path, size, times), filled in by the probe
// (format, geometry, EXIF facts) and by decode/features (readability, hashes), and
// read by every later stage. Records are plain values; a stage that fills a field
// owns it. Records are kept compact: the path is the only heap string, and the
// 1 KB look-alike thumbnail lives in a ThumbnailTable beside the records.
#pragma once

#include <array>
#include <atomic>
#include <cstdint>
#include <filesystem>
#include <memory>
#include <string>
#include <string_view>
#include <vector>

#include "tamis/base/spill_file.h"

namespace tamis {

// Image container format, decided from the bytes, never from the extension.
enum class Format : uint8_t { unknown, png, jpeg, gif, bmp, webp, tiff, pnm };

// Colour layout as stored in the file (before any conversion a decoder applies).
enum class ColorMode : uint8_t { unknown, gray, graya, rgb, rgba, palette, cmyk };

// What the audit made of a file. Every file seen gets exactly one kind, so
// files_seen == images + masks + unreadable + ignored.
enum class FileKind : uint8_t { image, mask, unreadable, ignored };

// Why a file is unreadable (kind == unreadable) or ignored (kind == ignored).
// `none` for readable images and masks.
enum class Defect : uint8_t {
  none,
  // ignored
  hidden,             // a path component starts with '.'
  not_an_image,       // no image magic and no image extension
  // unreadable
  io_error,           // open/read failed
  empty_file,         // zero bytes
  unknown_format,     // image extension, but the bytes are no known image format
  bad_header,         // header fields missing, out of range or inconsistent
  truncated,          // ends before the format says it should
  bad_checksum,       // a PNG chunk CRC does not match
  too_many_pixels,    // header claims more pixels than the configured limit
  too_many_bytes,     // file larger than the configured byte limit
  decode_failed,      // the decoder refused the data
  decode_warning,     // the decoder reported corrupt data (it would fill with grey)
  no_decoder,         // a format this build cannot decode
  unsupported_variant,  // a valid file of a variant the decoder does not implement (12-bit, lossless JPEG)
  over_memory_budget,   // decoding it would take more memory than the configured budget
};
inline constexpr Defect kLastDefect = Defect::over_memory_budget;

// A file that is no damaged file but one this build cannot decode (no_decoder,
// unsupported_variant): reported as a warning, not as an unreadable error.
inline bool is_undecodable_variant(Defect d) { return d == Defect::no_decoder || d == Defect::unsupported_variant; }

std::string_view to_string(Format f);
std::string_view to_string(ColorMode m);
std::string_view to_string(FileKind k);
// A stable code for the defect ("truncated") and a sentence a person understands.
std::string_view defect_code(Defect d);
std::string_view defect_message(Defect d);

// Facts read from the header, without decoding pixels.
struct ProbeInfo {
  Format format = Format::unknown;
  ColorMode mode = ColorMode::unknown;
  uint8_t bit_depth = 0;            // bits per sample as stored
  bool interlaced = false;          // PNG Adam7, progressive JPEG, interlaced GIF
  bool has_exif = false;
  bool has_gps = false;             // EXIF GPS IFD holds a latitude or longitude tag
  uint16_t orientation = 0;         // EXIF tag 0x0112; 0 when absent
  uint32_t width = 0;
  uint32_t height = 0;
  uint32_t frames = 1;              // >1 for animated GIF/APNG/WebP, multi-page TIFF
  uint8_t jpeg_quality = 0;         // JPEG: the IJG quality nearest to its luminance table (read/jpeg_quality.h); else 0
};

// Dihedral transform index t in [0, 8): bit 2 = transpose first, bit 1 = then
// flip rows (vertical mirror), bit 0 = then flip columns (horizontal mirror).
// t = 0 is the identity. (features.h computes the codes.)
inline constexpr int kDihedralCount = 8;

// The look-alike codes of one image, as its record holds them (features.h).
struct LookalikeCodes {
  std::array<uint64_t, kDihedralCount> phash{};  // phash[t] = DCT hash of transform t of the image
};

// A look-alike thumbnail: the 32x32 gray thumbnail the codes are made from
// (row-major, bytes 0-1023), then the picture's chroma at the same 32x32:
// Cb (1024-2047) and Cr (2048-3071), ITU-R BT.601 as OpenCV's YCrCb, 128 =
// neutral (a gray image's chroma is all 128). The chroma lets confirmation tell
// apart pictures whose gray versions match but whose colours differ in one part,
// and predict how a change of hue or saturation moves each pixel's gray level
// (match.h). Until the sixteenth session the chroma was 8x8 (1,152 bytes).
inline constexpr int kThumbSide = 32;
inline constexpr size_t kGrayBytes = 1024, kChromaPlane = 1024;
using Thumbnail = std::array<uint8_t, kGrayBytes + 2 * kChromaPlane>;
// Whether a thumbnail's chroma is neutral (both planes all 128: a gray image's).
bool neutral_chroma(const Thumbnail& t);

// Look-alike signals of one image as features.h computes them: the codes and the
// thumbnail. A record keeps the codes; the thumbnail goes to a ThumbnailTable.
struct Lookalike : LookalikeCodes {
  Thumbnail thumb{};
};

// The thumbnails of records, kept apart from the records (a record is then about
// 190 bytes instead of 1.2 KB): the look-alike stage needs every image's, the
// reports only a few, and a run that reuses cached groups loads just those. Indexed
// by record; a record may have no slot. The slots live in memory, or, for a tree
// whose thumbnails would take more memory than the read allows
// (ReadOptions::thumbnail_memory_bytes), in a scratch file (base/spill_file.h):
// then get() and put() read and write the file and at() may not be used. In the
// file a thumbnail's gray plane has its own place (record x 1,024 bytes) and its
// two chroma planes go to a pool after all the gray planes only when they are
// neither all 128 (a gray image) nor all 0 (never written): a tree of gray
// images writes a third of the bytes (Fashion-MNIST: 72 MB instead of 215 MB).
// keep_only() brings the slots the outputs show back into memory and frees the
// rest. Where the slots live never changes a value read from them.
class ThumbnailTable {
 public:
  ThumbnailTable() = default;
  ThumbnailTable(const ThumbnailTable& other);  // a spilled table's copy shares its file
  ThumbnailTable& operator=(const ThumbnailTable& other);
  ThumbnailTable(ThumbnailTable&&) noexcept = default;
  ThumbnailTable& operator=(ThumbnailTable&&) noexcept = default;
  // A table for `records` records, each with a slot: zeros until written, or,
  // with `zeroed` false, undefined until the caller writes every slot (the read
  // stage, whose threads then touch the fresh memory, each its own slots).
  void assign_all(size_t records, bool zeroed = true);
  // A table for `records` records, none with a slot.
  void assign_none(size_t records);
  // A table for `records` records, each with a slot (zeros until written) in a
  // scratch file in `dir`. Throws std::runtime_error when the file cannot be made.
  void assign_spilled(size_t records, const std::filesystem::path& dir);
  // Gives each record of `which` a slot (zeros) where it has none. Not
  // thread-safe; afterwards, threads may write the slots of distinct records.
  void make_room(const std::vector<uint32_t>& which);
  // Keeps the slots of `which` (those that have one), in memory, and frees every other.
  void keep_only(const std::vector<uint32_t>& which);
  bool has(size_t record) const { return all_ ? record < n_ : record < slot_.size() && slot_[record] != kNone; }
  bool spilled() const { return file_ != nullptr; }
  // Copies a slot out or in. REQUIRES has(record). Threads may call get() at
  // once, and put() at once for distinct records.
  void get(size_t record, Thumbnail& out) const;
  void put(size_t record, const Thumbnail& t);
  // Writes the slots of records first .. first + count - 1 (each with a slot) from data[0..].
  void put_range(size_t first, size_t count, const Thumbnail* data);
  // Copies the slots of `which` (ascending, each with a slot) to out[0..], reading
  // runs of neighbouring records at once from a scratch file.
  void get_many(const uint32_t* which, size_t count, Thumbnail* out) const;
  // REQUIRES has(record) && !spilled()
  Thumbnail& at(size_t record) { return all_ ? dense_[record] : data_[slot_[record]]; }
  const Thumbnail& at(size_t record) const { return all_ ? dense_[record] : data_[slot_[record]]; }
  size_t records() const { return n_; }

 private:
  static constexpr uint32_t kNone = UINT32_MAX;
  // A spilled record's chroma: a pool slot, or one of these.
  static constexpr uint32_t kZeroChroma = UINT32_MAX, kNeutralChroma = UINT32_MAX - 1;
  uint32_t chroma_slot(size_t record, const Thumbnail& t);
  void fill_chroma(uint32_t slot, uint8_t* chroma) const;
  uint64_t pool_offset(uint32_t slot) const { return static_cast<uint64_t>(n_) * kGrayBytes + uint64_t{slot} * 2 * kChromaPlane; }
  size_t n_ = 0;
  bool all_ = false;                     // record i in dense_[i], or in the file (gray at i * kGrayBytes)
  std::unique_ptr<Thumbnail[]> dense_;
  std::shared_ptr<SpillFile> file_;      // set: the slots are in this file
  std::vector<uint32_t> chroma_at_;      // spilled: per record, its chroma's pool slot or kZeroChroma / kNeutralChroma
  std::unique_ptr<std::atomic<uint32_t>> chroma_used_;  // spilled: pool slots handed out
  std::vector<uint32_t> slot_;           // otherwise: per record, its slot in data_ or kNone
  std::vector<Thumbnail> data_;
};

// Pixel statistics of the reduced decode (features.h), for the quality checks.
struct ImageStats {
  float luma_mean = 0;     // mean luminance, 0..255 (ITU-R BT.601 weights, as OpenCV's gray)
  float luma_std = 0;      // standard deviation of luminance
  float entropy = 0;       // Shannon entropy of the 256-bin luminance histogram, bits (0..8)
  float focus = 0;         // variance of the Laplacian at a 128 px shorter side
  uint8_t alpha_min = 255; // smallest alpha at full resolution (255: opaque or no alpha)
  bool channels_equal = false;  // a colour image whose channels are equal (within 2 levels)
  uint8_t distinct = 0;    // distinct pixel values at full resolution, counted up to 65 (65: more)
};

// Content features computed from the bytes and the decoded pixels.
struct Features {
  std::array<uint64_t, 2> content_hash{0, 0};  // XXH3-128 of the file bytes
  LookalikeCodes look;                          // the thumbnail is in a ThumbnailTable
  ImageStats stats;                             // set with has_lookalike
  bool has_content_hash = false;
  bool has_lookalike = false;                   // set for every readable image
};

struct FileRecord {
  std::string path;                 // relative to ROOT, '/' separators, raw name bytes
  uint64_t size = 0;
  int64_t mtime_ns = 0;
  uint64_t inode = 0;
  FileKind kind = FileKind::ignored;
  Defect defect = Defect::none;
  ProbeInfo probe;
  Features features;
};

}  // namespace tamis
