// The audit pipeline: the stages in order, from ROOT to the data every report renders.
//
//   read_tree: walk -> read (probe, decode, features) -> masks -> labels -> groups
//   place:     checks -> split -> policy
//
// Both wire stages that live in their own headers with their own contracts.
// They write no output (the report layer does, into the output folder);
// read_tree reads ROOT, and reads and updates the record cache when one is set
// (cache.h). The result depends only on the tree's contents and the settings,
// never on the cache, the thread count or the file system's listing order.
#pragma once

#include <cstdint>
#include <filesystem>
#include <functional>
#include <string>
#include <unordered_map>
#include <vector>

#include "tamis/base/stage_clock.h"
#include "tamis/model/findings.h"
#include "tamis/model/record.h"
#include "tamis/place/baseline.h"
#include "tamis/place/checks.h"
#include "tamis/place/policy.h"
#include "tamis/place/split.h"
#include "tamis/read/read_stage.h"
#include "tamis/read/walk.h"
#include "tamis/relate/groups.h"
#include "tamis/relate/labels.h"
#include "tamis/relate/masks.h"

namespace tamis {

// What read_tree uses: the tree, how to read it and how to relate its files.
struct TreeSettings {
  std::filesystem::path root;
  ReadOptions read;
  GroupSettings groups;
  MaskSettings masks;
  std::filesystem::path cache_file;  // record cache (cache.h); empty: none
};

// What place() used: the split and the check thresholds (the policy's).
struct PlaceSettings {
  SplitSettings split;
  CheckSettings checks;
  ClassMap classes;  // aliases and left-out classes (reported, not saved in the index)
};

// Both at once, for run_audit (the tests and benchmarks); the command line
// sets TreeSettings and PlaceOptions apart, each once.
struct AuditSettings : TreeSettings {
  SplitSettings split;
  CheckSettings checks;
};

struct Totals {
  uint64_t files_seen = 0, images = 0, masks = 0, unreadable = 0, ignored = 0;
};

// Everything an audit knows before the split: what `tamis split` reloads from the
// index an audit saves (index_file.h), so a re-split never reads an image.
struct AuditIndex {
  TreeSettings settings;            // root, read, group and mask settings of the reading run
  // The split and thresholds place() used: set by place(); saved in the index, whose
  // thresholds a re-split by place(index, split) takes (empty after read_tree).
  PlaceSettings placed;
  WalkResult walk;                  // walk.files is released once read; links and dirs kept
  std::vector<FileRecord> records;  // sorted by path, one per regular file
  // Thumbnails at hand after read_tree: every image's when the groups were made
  // afresh; those of group members and mask pairs (what the reports show) when
  // they came from the cache or the saved index.
  ThumbnailTable thumbs;
  MaskPairing masks;                // which records are masks, and whose
  Labelling labels;
  GroupResult groups;               // groups.group_of: per record, index into groups.groups or -1
  Totals totals;
  ReadCounts counts;                // how the records were obtained (not saved, not reported)
  std::string cache_note;           // why the cache was not used or was rebuilt, or the thumbnails' scratch file was not, if so
  std::vector<StageTime> times;     // not saved, not reported
};

// What place() needs beyond the index: the split, the policy (its thresholds
// replace the check settings), earlier placements, a baseline.
struct PlaceOptions {
  SplitSettings split;
  ClassMap classes;                       // class aliases and left-out classes (class_map.h)
  Policy policy;
  const KeepMap* keep = nullptr;          // earlier placements to keep
  const Baseline* baseline = nullptr;     // an earlier report to compare with
};

// An index placed and judged: checks, split, policy, baseline.
struct AuditResult : AuditIndex {
  SplitOutcome split;               // per record (excluded for non-rows)
  std::vector<Finding> findings;    // every finding, policy applied, sorted
  std::vector<bool> known;          // per finding: also in the baseline (same code and paths)
  std::vector<int> accepted;        // per finding: the policy's accept entry that accepts it, or -1
  std::vector<AcceptEntry> accept;  // the policy's accept list
  // The accept entry's reason for finding k, or nullptr when it is not accepted.
  const std::string* accepted_reason(size_t k) const {
    return k < accepted.size() && accepted[k] >= 0 && static_cast<size_t>(accepted[k]) < accept.size()
               ? &accept[static_cast<size_t>(accepted[k])].reason
               : nullptr;
  }
  BaselineDiff baseline;            // filled when a baseline was given
  ClassMapping class_mapping;       // what the class map did (labels above are the mapped ones)
  bool fail_on_new_only = false;
};

// walk -> read -> masks -> labels -> groups. Throws std::runtime_error when ROOT cannot be read.
AuditIndex read_tree(const TreeSettings& settings);

// The steps read_tree shares with the scale-out merge (scale_out.h):
// masks then labels from r.records and r.settings.masks;
void pair_and_label(AuditIndex& r, StageClock& clock);
// the records whose thumbnails the outputs may show (group members, images
// paired with masks and their masks, and the first kFloorCandidatesKept images
// in path order that meet each quality floor, checks.h; may repeat);
inline constexpr unsigned kFloorCandidatesKept = 64;
std::vector<uint32_t> shown_records(const AuditIndex& r);
// the totals from the records' kinds.
void count_totals(AuditIndex& r);

// checks -> split -> policy -> baseline, on an index (fresh, or loaded by `tamis
// split`). A pre-split tree keeps its folders' splits unless split.resplit.
AuditResult place(AuditIndex index, const PlaceOptions& options);
// The same with only split settings and the default policy.
AuditResult place(AuditIndex index, const SplitSettings& split, const KeepMap* keep = nullptr);

// read_tree then place with the settings' split and checks and the default severities.
AuditResult run_audit(const AuditSettings& settings);

// Manifest rows are the records that are images or unreadable image files.
inline bool is_manifest_row(const FileRecord& r) {
  return r.kind == FileKind::image || r.kind == FileKind::unreadable;
}

// 1 when any finding has error severity (and, with fail_on "new", is not known
// from the baseline), else 0: the documented exit status.
int policy_exit_status(const AuditResult& result);

}  // namespace tamis
