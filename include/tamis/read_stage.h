// The read stage: from the walk's entries to filled FileRecords.
//
// For each file, in parallel: decide whether it is a candidate image (hidden
// files, and files with neither an image signature nor an image extension, are
// `ignored`); read its bytes once; probe the header; decode it (within the
// limits); compute the content features from the same bytes and pixels.
// Anything that fails makes the file `unreadable` with a Defect; nothing here
// throws for a bad file. Files are opened read-only and never followed through
// a symbolic link.
//
// Output record i belongs to input entry i, whatever the thread count; the
// result is identical for any `threads`. The `on_progress` callback, when set,
// is called from worker threads with the count of files done (it must be
// thread-safe and cheap).
#pragma once

#include <cstdint>
#include <filesystem>
#include <functional>
#include <vector>

#include "tamis/decode.h"
#include "tamis/record.h"
#include "tamis/walk.h"

namespace tamis {

struct ReadOptions {
  unsigned threads = 0;                      // 0 = all cores
  uint64_t max_bytes = 4ull << 30;           // files larger than this are not read
  DecodeLimits decode;
  std::function<void(size_t done, size_t total)> on_progress;
};

std::vector<FileRecord> read_files(const std::filesystem::path& root, const std::vector<WalkEntry>& entries,
                                   const ReadOptions& options);

// True when some component of the relative path starts with '.'.
bool is_hidden_path(std::string_view rel_path);

}  // namespace tamis
