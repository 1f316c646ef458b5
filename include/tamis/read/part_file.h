// A scan's part: what `tamis scan` read of one shard of a tree (shard.h), for
// `tamis join` and `tamis merge` (docs/scale-out.md).
//
// The part holds the shard's records as read (before mask pairing, the same
// record bytes as the cache: record_codec.h), the look-alike thumbnail of every
// record that has one, and the shard's share of the walk's folders, links and
// special files. Layout (little-endian; docs/scale-out.md "The part file"):
//
//   header   64 bytes: magic (16), version u32, 0 u32, meta bytes u64,
//            record count u64, record bytes u64, thumbnail count u64, 0 u64
//   meta     CBOR map: tool version, ROOT, reading settings and their key, shard,
//            the walk's lists, the read counts
//   records  per record: path length u32, path, size u64, mtime u64, inode u64,
//            record byte count u8, the record's bytes
//   table    per thumbnail: record index u64, XXH3-64 of the thumbnail u64
//   thumbs   per thumbnail: 3,072 bytes (model/record.h Thumbnail)
//   trailer  XXH3-64 of every byte before the thumbnails, XXH3-64 of every byte
//            before the trailer, "tamisend"
//
// Opening checks the magic, the version, the length the header implies, the
// first checksum and every value it decodes (paths ascending and in the part's
// shard, indices in range; the records as they are read): a damaged, cut or
// foreign file throws PartError, never yields half a part. A thumbnail read later is checked against its own
// checksum; verify() checks the whole file. Reading needs no more memory than
// the records: thumbnails are read on demand (pread; safe from many threads).
#pragma once

#include <cstdint>
#include <filesystem>
#include <ostream>
#include <stdexcept>
#include <string>
#include <vector>

#include "tamis/model/record.h"
#include "tamis/read/read_stage.h"
#include "tamis/read/shard.h"
#include "tamis/read/walk.h"

namespace tamis {

inline constexpr uint32_t kPartVersion = 3;  // 2: thumbnails of 3,072 bytes (32x32 chroma); 3: records carry the JPEG quality, and a gray thumbnail is stored as its gray plane (1,024 bytes)

struct PartError : std::runtime_error {
  using std::runtime_error::runtime_error;
};

// What a scan read: one shard of ROOT.
struct ScanPart {
  std::string root;              // absolute ROOT, as the scan was given it
  DecodeLimits decode;           // the reading settings that are saved with an audit
  uint64_t max_bytes = 0;
  std::string read_key;          // tree_reader.h reading_key: parts merge only when equal
  std::string tool;              // the tool version that wrote the part
  Shard shard;
  WalkResult walk;               // the shard's links, special files, unreadable folders, folders; no files
  std::vector<FileRecord> records;  // sorted by path, as read (before mask pairing); empty in PartFile::info()
  ThumbnailTable thumbs;         // writing: every record with features.has_lookalike has a slot
  ReadCounts counts;             // how the records were obtained (the summary's figures)
  std::string note;              // the cache's note, if any
};

// Writes `part` (thumbnails from part.thumbs). Throws std::runtime_error when the
// stream fails, std::logic_error when a look-alike record has no thumbnail.
void write_part(std::ostream& os, const ScanPart& part);

class PartFile {
 public:
  // Opens `file` and checks its header, length and first checksum; fills info()
  // but its records (read them with RecordReader or read_records) and thumbs.
  // Throws PartError.
  explicit PartFile(const std::filesystem::path& file);
  ~PartFile();
  PartFile(const PartFile&) = delete;
  PartFile& operator=(const PartFile&) = delete;

  const std::filesystem::path& file() const { return file_; }
  uint64_t records() const { return count_; }

  // The records one at a time, in path order, each checked as it is decoded
  // (lengths, order, shard, its thumbnail). Throws PartError.
  class RecordReader {
   public:
    explicit RecordReader(const PartFile& part);
    // The next record into `r`; false after the last (when the records' bytes and
    // the thumbnail table have been used up exactly).
    bool next(FileRecord& r);
    // The thumbnail of the record last given, or -1.
    int64_t thumbnail() const { return thumbnail_; }

   private:
    void fill(size_t need);
    const PartFile& part_;
    std::vector<uint8_t> buf_;
    size_t at_ = 0, have_ = 0;
    uint64_t read_ = 0, index_ = 0, thumb_ = 0;
    int64_t thumbnail_ = -1;
    std::string last_;
  };
  // Every record, in order (RecordReader). Throws PartError.
  std::vector<FileRecord> read_records() const;
  ScanPart& info() { return info_; }
  const ScanPart& info() const { return info_; }
  uint64_t file_bytes() const { return size_; }
  uint64_t head_checksum() const { return head_sum_; }  // names the part's contents (not its thumbnails' bytes)

  size_t thumbnails() const { return thumb_record_.size(); }
  // Record index (within the part) of thumbnail k, ascending in k.
  uint32_t thumbnail_record(size_t k) const { return thumb_record_[k]; }
  // Thumbnails first .. first + count - 1 into out[0..]; each checked. Throws PartError.
  void read_thumbnails(size_t first, size_t count, Thumbnail* out) const;
  // Reads the whole file and checks its second checksum. Throws PartError.
  void verify() const;
  // Closes the file; every later read opens it for that read alone and closes it
  // after, so that a merge of thousands of parts holds no descriptor between reads
  // (the usual limit is 1,024 a process). A file that is no longer the one first
  // opened (device, inode, size or modification time) fails the read.
  void release() const;

 private:
  std::filesystem::path file_;
  mutable int fd_ = -1;  // -1 once released
  struct stat_key {
    uint64_t dev = 0, ino = 0, size = 0;
    int64_t mtime_ns = 0;
    bool operator==(const stat_key&) const = default;
  } key_;
  uint64_t size_ = 0, thumbs_at_ = 0, head_sum_ = 0, file_sum_ = 0, recs_at_ = 0, recs_bytes_ = 0, count_ = 0;
  ScanPart info_;
  std::vector<uint32_t> thumb_record_;
  std::vector<uint64_t> thumb_sum_;
  // Which thumbnails are stored whole (colour; a gray one is its gray plane
  // alone), 64 to a word, and how many whole ones come before each word: a
  // thumbnail's place in the file from them (thumbnail_offset).
  std::vector<uint64_t> thumb_colour_;
  std::vector<uint32_t> colour_before_;
  bool thumbnail_in_colour(size_t k) const;
  uint64_t thumbnail_offset(size_t k) const;
  [[noreturn]] void fail(const std::string& why) const;
  // Reads n bytes at `at` whole (pread, retried); fail(why) when it cannot.
  void read_at(uint64_t at, void* out, size_t n, const char* why) const;
};

}  // namespace tamis
