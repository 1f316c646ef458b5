// The read stage: from the walk's entries to filled FileRecords.
//
// For each file, in parallel: decide whether it is a candidate image (hidden
// files, and files with neither an image signature nor an image extension, are
// `ignored`); read its bytes once; probe the header; decode it (within the
// limits); compute the content features from the same bytes and pixels.
// Anything that fails makes the file `unreadable` with a Defect; nothing here
// throws for a bad file. Files are opened read-only and never followed through
// a symbolic link. An entry the walk did not stat (stamped = false) gets its
// size, time and inode from the open descriptor.
//
// With a cache, a file whose path, size, modification time and inode match a
// stored record is not opened; one whose bytes hash to a stored record is not
// decoded. Output record i belongs to input entry i, whatever the thread count;
// the result is identical for any `threads` and with or without the cache. The `on_progress` callback, when set,
// is called from worker threads with the count of files done (it must be
// thread-safe and cheap).
#pragma once

#include <cstdint>
#include <filesystem>
#include <functional>
#include <string>
#include <vector>

#include "tamis/model/record.h"
#include "tamis/read/decode/decode.h"
#include "tamis/read/walk.h"

namespace tamis {

class RecordCache;

// What the read stage did with the files (for the summary; never in a report).
struct ReadCounts {
  uint64_t read = 0;            // files opened and decoded (or found not to be images); hidden files are not opened
  uint64_t cached = 0;          // records reused from the cache by path, size, time and inode
  uint64_t cached_by_hash = 0;  // records reused by content hash (touched, rewritten, copied, moved files)
  uint64_t moved = 0;           // of those, files whose stored path is no longer in the tree (moved or renamed)
  std::string scratch_note;     // why the thumbnails stayed in memory although a scratch file was due (empty: they did not)
};

// The read's settings (each set once, by the command line).
struct ReadOptions {
  unsigned threads = 0;                      // 0 = all cores
  uint64_t max_bytes = 4ull << 30;           // files larger than this are not read
  DecodeLimits decode;
  // Thumbnails (3,072 bytes an image) beyond this many bytes go to a scratch
  // file in `scratch_dir` instead of memory (ThumbnailTable), unless that folder
  // is empty, missing or inside ROOT, or the file cannot be made there (no
  // space, read-only: ReadCounts::scratch_note says why, and the thumbnails stay
  // in memory). Changes memory and time, never a value.
  uint64_t thumbnail_memory_bytes = 64ull << 20;
  std::filesystem::path scratch_dir;
  std::function<void(size_t done, size_t total)> on_progress;
};

// What a read works with beyond its settings: the cache it reuses records from,
// and where it leaves thumbnails and its bookkeeping. Each is used or filled only
// when set. The read layer's tree reader (tree_reader.h) is the one caller that
// sets the cache's parts.
struct ReadContext {
  RecordCache* cache = nullptr;              // records to reuse (cache.h; taken out of it); none when null
  ReadCounts* counts = nullptr;              // filled when set
  // Filled when set (with a cache): per record, the cache row whose stored
  // thumbnail is the record's (it came from the cache, its thumbnail not yet
  // loaded: RecordCache::load_thumbnails), or -1 (read from its file).
  std::vector<int64_t>* thumbnail_row = nullptr;
  // Filled when set (with a cache): the records reused by content hash (a
  // touched, rewritten, copied or moved file), ascending. The cache stores them
  // anew, so their thumbnails must be loaded before RecordCache::store.
  std::vector<uint32_t>* by_content = nullptr;
  // Filled when set: the thumbnail of every image read from its file (records
  // from the cache get no slot here; their thumbnails stay in the cache).
  ThumbnailTable* thumbs = nullptr;
};

std::vector<FileRecord> read_files(const std::filesystem::path& root, const std::vector<WalkEntry>& entries,
                                   const ReadOptions& options, const ReadContext& context = {});

// Gives `thumbs` a slot for each of `records` records in a scratch file when
// they would take more than options.thumbnail_memory_bytes and
// options.scratch_dir is a folder outside ROOT; true when it did. A scratch file
// that cannot be made (no space, read-only) leaves `thumbs` as it was and says
// why in `note` (cleared otherwise): the caller keeps them in memory, which gives
// the same values. (The read stage, and the merge of a scan's parts.)
bool assign_scratch_thumbnails(ThumbnailTable& thumbs, size_t records, const std::filesystem::path& root,
                               const ReadOptions& options, std::string& note);

// True when some component of the relative path starts with '.'.
bool is_hidden_path(std::string_view rel_path);

}  // namespace tamis
