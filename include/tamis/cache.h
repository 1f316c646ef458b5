// The record cache: per-file records kept in SQLite between runs, so a second
// audit of an unchanged tree reads no image.
//
// A record is reused when its file has the same path (under the same ROOT), size,
// modification time and inode as when it was stored; a moved or renamed file with
// the same bytes reuses a record found by its content hash and size (its bytes are
// read and hashed, but not decoded). Records are stored whole (probe, hashes,
// statistics, thumbnail), as read, before mask pairing.
//
// The file uses WAL mode and a busy timeout, so two runs may share it; every write
// is one transaction, so a killed run leaves the previous state. A cache whose
// schema version or record settings differ is cleared; one that SQLite finds
// damaged is moved aside (FILE.damaged-<pid>) and rebuilt. The last look-alike
// groups of the root are kept too, so an unchanged set skips the Hamming join. The cache never
// decides an output: a run with and without it writes the same files.
// Not thread-safe: one RecordCache per run, used from the calling thread.
#pragma once

#include <filesystem>
#include <memory>
#include <optional>
#include <string>
#include <unordered_map>
#include <vector>

#include "tamis/groups.h"
#include "tamis/record.h"

namespace tamis {

inline constexpr int kCacheSchemaVersion = 1;

class RecordCache {
 public:
  // Opens (or creates) FILE for records of `root` read with `settings_key` (a
  // string naming every setting that changes a record). Throws std::runtime_error
  // when the file cannot be created at all.
  RecordCache(const std::filesystem::path& file, const std::filesystem::path& root, const std::string& settings_key);
  ~RecordCache();
  RecordCache(const RecordCache&) = delete;
  RecordCache& operator=(const RecordCache&) = delete;

  // All records stored for this root, keyed by path.
  const std::unordered_map<std::string, FileRecord>& by_path() const { return by_path_; }
  // A stored record with this content hash and size, from any path of this root.
  const FileRecord* by_content(const std::array<uint64_t, 2>& hash, uint64_t size) const;

  // Makes the root's stored records equal `records` in one transaction, writing
  // only rows that changed and deleting rows of files that are gone.
  void store(const std::vector<FileRecord>& records);

  // The look-alike groups of an unchanged set: stored under a fingerprint of every
  // grouped record's path and content hash and of the group settings; loaded
  // only when the fingerprint matches (and every member index is in range).
  std::optional<GroupResult> load_groups(uint64_t fingerprint, size_t n_records) const;
  void store_groups(uint64_t fingerprint, const GroupResult& groups);

  bool rebuilt() const { return rebuilt_; }  // the file was damaged and started afresh
  const std::filesystem::path& file() const { return file_; }

 private:
  struct Db;
  std::unique_ptr<Db> db_;
  std::filesystem::path file_;
  std::string root_;
  std::unordered_map<std::string, FileRecord> by_path_;
  std::unordered_map<std::string, const FileRecord*> by_hash_;
  bool rebuilt_ = false;
};

// $XDG_CACHE_HOME/tamis/records.sqlite, or ~/.cache/tamis/records.sqlite.
std::filesystem::path default_cache_file();

}  // namespace tamis
