// Scale-out: the audit cut into tasks for a cluster engine (docs/scale-out.md).
//
//   scan  (N tasks):  walk -> keep shard K's share (read/shard.h) -> read; a part (read/part_file.h)
//   join  (S tasks, optional): every part's records -> slice s of the look-alike join
//                     (relate/groups.h join_lookalike_slice); a join output (relate/join_file.h)
//   merge (1 task):   the parts (and the join outputs) -> masks -> labels -> groups,
//                     the same AuditIndex read_tree gives for the whole tree; then
//                     place() and the outputs as in an audit.
//
// The merge's result equals read_tree's on the same tree with the same
// settings: records, masks, labels, groups and the thumbnails the outputs show
// (tests compare manifest.csv and report.json byte for byte). A set of parts or
// join outputs that cannot give that result is refused with MergeError: parts
// of other tool versions, reading settings or ROOTs, a missing or repeated
// shard, a damaged or cut part, join outputs of other parts or settings, a
// missing or repeated slice.
#pragma once

#include <cstdint>
#include <filesystem>
#include <memory>
#include <stdexcept>
#include <string>
#include <vector>

#include "tamis/pipeline/audit.h"
#include "tamis/read/part_file.h"
#include "tamis/read/shard.h"
#include "tamis/relate/join_file.h"

namespace tamis {

// A set of parts or join outputs that cannot be merged (the CLI exits 2).
struct MergeError : std::runtime_error {
  using std::runtime_error::runtime_error;
};

// The reading layer run alone on shard `shard` of settings.root, with the
// settings' cache when set. The part has every thumbnail of its records.
ScanPart scan_tree(const TreeSettings& settings, Shard shard, std::vector<StageTime>* times = nullptr);

// The parts of one scan, opened and checked as a set (headers and first
// checksums; verify() reads every byte). Records merged in path order.
class PartSet {
 public:
  explicit PartSet(const std::vector<std::filesystem::path>& files);  // throws MergeError
  // Reads every part whole and checks its second checksum. Throws MergeError.
  void verify() const;
  // Copies the thumbnails of `count` records (indices of records(), ascending)
  // to out[0..], reading runs of neighbours at once (records() may have been
  // moved out by then). Throws MergeError.
  void read_thumbnails(const uint32_t* records, size_t count, Thumbnail* out) const;
  // The same into `into`'s slots of `records` (which exist), in blocks.
  void load_thumbnails(const std::vector<uint32_t>& records, ThumbnailTable& into) const;

  const std::string& root() const { return parts_.front()->info().root; }
  const ScanPart& first() const { return parts_.front()->info(); }
  uint32_t count() const { return static_cast<uint32_t>(parts_.size()); }
  uint64_t key() const { return key_; }  // names the set's contents (join outputs carry it)
  std::vector<FileRecord>& records() { return records_; }
  const std::vector<FileRecord>& records() const { return records_; }
  WalkResult& walk() { return walk_; }
  const ReadCounts& counts() const { return counts_; }
  const std::string& note() const { return note_; }

 private:
  std::vector<std::unique_ptr<PartFile>> parts_;  // in shard order
  std::vector<FileRecord> records_;
  std::vector<uint32_t> part_of_;   // per record: its part
  std::vector<uint32_t> thumb_of_;  // per record: its thumbnail in its part, or UINT32_MAX
  WalkResult walk_;
  ReadCounts counts_;
  std::string note_;
  uint64_t key_ = 0;
};

// Slice `slice` of the look-alike join over the whole set (relate/groups.h),
// after mask pairing with settings.masks (it changes the parts' records' kinds),
// with settings.groups on settings.read.threads. Throws MergeError.
JoinSlice join_parts(PartSet& parts, const TreeSettings& settings, Shard slice);

// masks -> labels -> groups over the set: the groups from `joins` when given
// (all slices of one join of these parts, with `settings.groups`), else found
// here. `settings` gives the mask and group settings, threads and the
// thumbnails' memory; ROOT and the reading settings come from the parts.
// Throws MergeError.
AuditIndex merge_parts(PartSet parts, const std::vector<JoinSlice>& joins, const TreeSettings& settings);

}  // namespace tamis
