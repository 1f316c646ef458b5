// The walk: list every regular file under ROOT, exactly once, in bytewise path order.
//
// Promises:
//  - Every regular file reachable from ROOT without following a symbolic link is
//    listed once; the order is bytewise on the relative path, whatever order the
//    file system returns.
//  - Symbolic links are never followed (neither to files nor to folders), so the
//    walk cannot leave ROOT and cannot be sent round a link loop. Each link is
//    reported in `links` instead. A folder reached twice (a bind mount loop) is
//    entered only once: folders are tracked by (device, inode).
//  - Nothing is opened for writing; file contents are not read.
//  - Folders that cannot be opened are reported in `unreadable_dirs`; the walk goes on.
// Not thread-safe in itself; a Walk result is a plain value.
#pragma once

#include <cstdint>
#include <filesystem>
#include <string>
#include <vector>

namespace tamis {

struct WalkEntry {
  std::string path;   // relative to ROOT, '/'-separated, raw bytes
  uint64_t size = 0;
  int64_t mtime_ns = 0;
  uint64_t inode = 0;
  uint64_t device = 0;
  bool stamped = true;  // size, time, inode and device filled (false: not stat'ed, see walk_tree)
};

struct WalkResult {
  std::vector<WalkEntry> files;             // sorted bytewise by path
  std::vector<std::string> links;           // symbolic links met (not followed), sorted
  std::vector<std::string> special;         // FIFOs, sockets and devices met (never opened), sorted
  std::vector<std::string> unreadable_dirs; // folders that could not be listed, sorted
  std::vector<std::string> dirs;            // every folder walked (relative, "" is ROOT excluded), sorted
};

// Walks ROOT. Throws std::runtime_error when ROOT itself is not a readable folder.
// `threads` stat the files (0 = all cores); the result does not depend on it.
// With `stat_files` false, files the folder listing already types as regular are
// not stat'ed (stamped = false): for a caller that opens every file anyway and
// takes the stamp from the open descriptor (the read stage without cache rows),
// which saves one path lookup a file.
WalkResult walk_tree(const std::filesystem::path& root, unsigned threads = 0, bool stat_files = true);

// Stats every entry of `walk` not yet stamped (on `threads`), as walk_tree with
// `stat_files` does: an entry that is no longer a regular file moves to `links`,
// `special` or `unreadable_dirs` (kept sorted). For a caller that listed first and decides
// later whether stamps are needed (the audit, while its cache loads).
void stamp_files(const std::filesystem::path& root, WalkResult& walk, unsigned threads = 0);

// True when `child` is ROOT or lies inside it: after resolving both to canonical
// paths where they exist, or because a folder on the child's path is ROOT itself
// by device and inode (ROOT seen through a bind mount). Used to refuse outputs
// inside the data set.
bool path_is_inside(const std::filesystem::path& root, const std::filesystem::path& child);

}  // namespace tamis
