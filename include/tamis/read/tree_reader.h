// The reading layer run over a tree, with the record cache behind one seam.
//
// TreeReader lists ROOT, reads every file (reusing what the record cache holds,
// cache.h), stores the records as read, hands out the thumbnails still in the
// cache when a later stage needs them, and keeps the look-alike groups of an
// unchanged set between runs. The cache's protocol lives here and nowhere else:
// its settings key (every setting that changes a record), opening it beside the
// listing, stamping files only when stored records may match, storing records
// before mask pairing changes their kinds, the rows whose thumbnails are still in
// the file, re-reading a file whose stored thumbnail has gone, the groups'
// fingerprint, and what to tell the user about the cache.
//
// The cache never decides an output: every method gives the same records,
// thumbnails and groups with or without it (tests compare all four outputs). A
// cache that cannot be used is noted (note()) and the run goes on without it.
// Not thread-safe: one TreeReader per run, its methods called in the order below.
#pragma once

#include <cstdint>
#include <filesystem>
#include <memory>
#include <optional>
#include <string>
#include <string_view>
#include <thread>
#include <vector>

#include "tamis/base/stage_clock.h"
#include "tamis/model/group.h"
#include "tamis/model/record.h"
#include "tamis/read/read_stage.h"
#include "tamis/read/shard.h"
#include "tamis/read/walk.h"

namespace tamis {

class RecordCache;

// Every reading setting and rule that changes a record, as one string: the
// cache's settings key, and what scan parts must share to be merged.
std::string reading_key(const ReadOptions& options);

class TreeReader {
 public:
  // Starts opening `cache_file` (empty: no cache) on a thread of its own.
  TreeReader(std::filesystem::path root, ReadOptions options, std::filesystem::path cache_file);
  ~TreeReader();
  TreeReader(const TreeReader&) = delete;
  TreeReader& operator=(const TreeReader&) = delete;

  // 1. Lists ROOT while the cache loads, keeps `shard`'s share of it (shard.h;
  // all of it by default); stamps the files when stored records may match them.
  // Throws std::runtime_error when ROOT cannot be read.
  WalkResult walk(StageClock& clock, Shard shard = {});
  // 2. Reads every listed file (record i for walk.files[i]) and stores the records
  // in the cache as read. `walk` must outlive the reader's use of thumbnails (4).
  std::vector<FileRecord> read(const WalkResult& walk, ThumbnailTable& thumbs, ReadCounts& counts, StageClock& clock);
  // 3. The groups stored for exactly these records (paths, kinds, bytes) under
  // `groups_key` (a string naming every setting and rule that changes the groups),
  // if the cache holds them.
  std::optional<GroupResult> stored_groups(const std::vector<FileRecord>& records, std::string_view groups_key);
  void store_groups(const GroupResult& groups);
  // 4. Puts into `thumbs` the thumbnails of `which` that are still in the cache (a
  // file whose stored thumbnail has gone is read again, its record replaced by the
  // fresh one, which is the same). All of them: every record's.
  void load_thumbnails(std::vector<FileRecord>& records, ThumbnailTable& thumbs, const std::vector<uint32_t>& which);
  void load_all_thumbnails(std::vector<FileRecord>& records, ThumbnailTable& thumbs);

  // Why the cache was not used, was rebuilt or set aside, or had damaged rows; empty when all went well.
  std::string note() const;

 private:
  std::filesystem::path root_;
  ReadOptions options_;
  std::filesystem::path cache_file_;
  std::unique_ptr<RecordCache> cache_;
  std::thread loader_;
  std::string note_;
  const WalkResult* walk_ = nullptr;
  std::vector<int64_t> thumbnail_row_;  // per record: the cache row still holding its thumbnail, or -1
  uint64_t fingerprint_ = 0;
  ReadCounts* counts_ = nullptr;
};

}  // namespace tamis
