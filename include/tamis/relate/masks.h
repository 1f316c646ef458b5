// Mask pairing: tell masks and annotation images from photographs, pair each
// image with its own mask, and keep masks out of the classes.
//
// Candidates come from names (docs/masks.md):
//  - sibling folders whose names differ by one token ("leaf" / "leaf_mask",
//    "leaf GT", "labels-leaf"), or a sibling named with a mask word ("masks",
//    "annotations", "gt", ...) beside any folder: files pair on their path
//    below the two folders without the extension (a mask stem may also carry a
//    trailing token: "0001_mask" pairs with "0001");
//  - within one folder, "X.ext" and "X<sep><token>.ext" for a token with a letter.
// A name match proves nothing (numbered names repeat in every class), so a pair
// is confirmed only by pixels: the mask candidate has few distinct values (at most
// 32) and is gray, equal-channel or palette (or has at most 8 colours, a label
// map), while its partner looks like a photograph (more than 64 distinct values).
// A folder (or a suffix token) becomes a mask folder when more than half of its
// pairs are confirmed; its files become `mask` records, linked to their images.
// Settings force or forbid a folder's role. Deterministic: folders and files are
// taken in bytewise order. Pure function of the records and the settings.
#pragma once

#include <cstdint>
#include <string>
#include <vector>

#include "tamis/model/findings.h"
#include "tamis/model/record.h"
#include "tamis/read/walk.h"

namespace tamis {

struct MaskSettings {
  std::vector<std::string> force;   // folders (relative to ROOT) that hold masks, whatever the pixels say
  std::vector<std::string> forbid;  // folders that never hold masks
};

struct MaskEvidence {
  std::string folder;    // the mask folder candidate, or "folder/*<token>" for a suffix group
  std::string partner;   // the photograph folder
  std::string layout;    // "sibling", "parallel" or "suffix"
  uint64_t pairs = 0;    // name pairs found
  uint64_t confirmed = 0;  // pairs whose pixels confirm mask + photograph
  bool accepted = false;
  std::string decided_by;  // "pixels", "forced", "forbidden"
};

struct MaskPairing {
  std::vector<int64_t> mask_of;   // per record: its mask's record index, or -1
  std::vector<int64_t> image_of;  // per mask record: its image's record index, or -1 (orphan)
  std::vector<MaskEvidence> evidence;
  std::vector<std::string> layout_roots;  // top-level photograph folders of a parallel layout at ROOT
  std::vector<uint32_t> misfiled;         // photographs in a mask folder, masks among photographs
  std::vector<uint32_t> orphan_images;    // images in a paired folder with no mask
};

// True when the record's pixels look like a mask / like a photograph (see above).
bool looks_like_mask(const FileRecord& r);
bool looks_like_photo(const FileRecord& r);

// Decides which records are masks (sets their kind to FileKind::mask) and links them.
MaskPairing pair_masks(std::vector<FileRecord>& records, const MaskSettings& settings);

// Findings: mask-orphan (warning), mask-size-mismatch (error), mask-empty
// (warning), mask-misfiled (warning).
void check_masks(const std::vector<FileRecord>& records, const MaskPairing& pairing, std::vector<Finding>& out);

}  // namespace tamis
