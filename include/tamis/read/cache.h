// The record cache: per-file records kept in SQLite between runs, so a second
// audit of an unchanged tree reads no image.
//
// A record is reused when its file has the same path (under the same ROOT), size,
// modification time and inode as when it was stored; a moved or renamed file with
// the same bytes reuses a record found by its content hash and size (its bytes are
// read and hashed, but not decoded). Records are stored whole (probe, hashes,
// statistics, thumbnail), as read, before mask pairing, in the fixed byte layout
// of record_codec.h; the 1 KB thumbnails sit in a table of their own and are
// read only for the records that need them (load_thumbnails): an unchanged set
// with cached groups reads those of its groups' members only.
//
// The file uses WAL mode and a busy timeout, so two runs may share it; every write
// is one transaction, so a killed run leaves the previous state. A cache whose
// schema version or record settings differ is cleared; one that SQLite finds
// damaged while it is opened or loaded is moved aside (FILE.damaged-<pid>) and
// rebuilt. The last look-alike groups of the root are kept too, so an unchanged
// set skips the Hamming join. The cache never decides an output: a run with and
// without it writes the same files.
// Not thread-safe, except where a method says so: one RecordCache per run.
#pragma once

#include <algorithm>
#include <array>
#include <compare>
#include <filesystem>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "tamis/model/group.h"
#include "tamis/model/record.h"
#include "tamis/read/walk.h"

namespace tamis {

// The stored groups' layout, part of the groups fingerprint (2: with their links).
inline constexpr int kGroupsFormat = 3;
inline constexpr int kCacheSchemaVersion = 7;  // 2: records in fixed bytes (was CBOR); 3: thumbnails apart; 4: thumbnails with 8x8 chroma; 5: a checksum ends every row; 6: thumbnails with 32x32 chroma; 7: records carry the JPEG quality

class RecordCache {
 public:
  // Opens (or creates) FILE for records of `root` read with `settings_key` (a
  // string naming every setting that changes a record), and loads the root's
  // records. Throws std::runtime_error when the file cannot be created at all.
  RecordCache(const std::filesystem::path& file, const std::filesystem::path& root, const std::string& settings_key);
  ~RecordCache();
  RecordCache(const RecordCache&) = delete;
  RecordCache& operator=(const RecordCache&) = delete;

  size_t rows() const { return paths_.size(); }
  // Per entry (sorted bytewise by path, as the walk gives them): the stored row
  // with the same path, size, modification time and inode, or -1.
  std::vector<int64_t> match(const std::vector<WalkEntry>& entries) const;
  // Moves row `row` out (its record, with its path; the thumbnail stays in the
  // cache until load_thumbnails). Each row at most once; distinct rows may be taken from
  // different threads at once.
  FileRecord take(size_t row);
  bool taken(size_t row) const { return taken_[row] != 0; }
  // All rows at once, in row order, when the caller's entries match them one to
  // one (the common unchanged tree): the table is handed over, not copied.
  std::vector<FileRecord> take_all();
  // A row with this content hash and size (the first by path), or -1. Thread-safe.
  int64_t row_with_content(const std::array<uint64_t, 2>& hash, uint64_t size) const;
  // Every row with this content hash and size, ascending. Thread-safe.
  std::vector<size_t> rows_with_content(const std::array<uint64_t, 2>& hash, uint64_t size) const;
  // True when a row has this path. Thread-safe.
  bool has_path(const std::string& path) const { return std::binary_search(paths_.begin(), paths_.end(), path); }
  // A copy of a row that was not taken (the thumbnail not loaded). Thread-safe.
  FileRecord copy(size_t row) const;
  const std::string& path_of(size_t row) const { return paths_[row]; }

  // Loads the stored thumbnail of row source_row[i] into thumbs (record i, a slot
  // made where needed) for each i in `which` (rows < 0 are skipped). Returns the
  // indices whose thumbnail is not in the file (another run removed it): their
  // files must be read again.
  std::vector<uint32_t> load_thumbnails(ThumbnailTable& thumbs, const std::vector<int64_t>& source_row,
                                        const std::vector<uint32_t>& which);

  // Makes the root's stored records equal `records` in one transaction, writing
  // only rows that changed and deleting rows of files that are gone.
  // REQUIRES: every image that is new or changed has its thumbnail in `thumbs` (a
  // record copied from another row by content: load_thumbnails first).
  void store(const std::vector<FileRecord>& records, const ThumbnailTable& thumbs);

  // The look-alike groups of an unchanged set: stored under a fingerprint of every
  // grouped record's path and content hash and of the group settings; loaded
  // only when the fingerprint matches (and every member index is in range).
  std::optional<GroupResult> load_groups(uint64_t fingerprint, size_t n_records) const;
  void store_groups(uint64_t fingerprint, const GroupResult& groups);

  bool rebuilt() const { return rebuilt_; }  // the file was damaged and started afresh
  bool set_aside_after_damage() const { return set_aside_; }  // damage met later: moved aside for the next run
  // Rows (records, thumbnails, groups) whose checksum did not match when read:
  // each was treated as absent (its file read again, the groups computed again).
  size_t damaged_rows() const { return damaged_rows_; }
  const std::filesystem::path& file() const { return file_; }

 private:
  struct Db;
  struct Stamp {
    uint64_t size = 0;
    int64_t mtime_ns = 0;
    uint64_t inode = 0;
    bool operator==(const Stamp&) const = default;
  };
  struct ContentKey {
    uint64_t h0, h1, size;
    uint32_t row;
    auto operator<=>(const ContentKey&) const = default;
  };
  void open_and_load(const std::string& settings_key);
  void store_rows(const std::vector<FileRecord>& records, const ThumbnailTable& thumbs);
  // Damage met after the load (a page that only a later statement reads): the
  // file is closed and moved aside (FILE.damaged-PID), so that the next run
  // starts a new one instead of meeting the same damage on every run.
  void set_aside() const;
  // Row k's path, size, modification time and inode (kept apart from its record) into r.
  void identify(FileRecord& r, size_t k) const;
  std::unique_ptr<Db> db_;
  std::filesystem::path file_;
  std::string root_;
  std::vector<std::string> paths_;   // sorted bytewise
  std::vector<Stamp> stamps_;        // per row
  std::vector<FileRecord> rows_;     // per row; the path is in paths_
  std::vector<uint8_t> taken_;       // per row
  std::vector<ContentKey> by_content_;  // sorted
  bool rebuilt_ = false;
  mutable size_t damaged_rows_ = 0;
  mutable bool set_aside_ = false;
};

// $XDG_CACHE_HOME/tamis/records.sqlite, or ~/.cache/tamis/records.sqlite.
std::filesystem::path default_cache_file();

}  // namespace tamis
