// Checks: findings about the inventory, computed from records and labels.
//
// Each check is a pure function of the audit data; it adds Findings and never
// prints or writes. This file holds the checks of the reading stage (unreadable
// files, files without a label, links not followed, folders not listed).
#pragma once

#include <string>
#include <string_view>
#include <vector>

#include "tamis/model/findings.h"
#include "tamis/model/record.h"
#include "tamis/place/split.h"
#include "tamis/read/walk.h"
#include "tamis/relate/groups.h"
#include "tamis/relate/labels.h"

namespace tamis {

// Thresholds of the image and label checks (docs/checks.md says where each
// number comes from). The policy issue makes them settable from a file.
struct CheckSettings {
  uint32_t min_side = 32;          // shorter side below this: tiny-image
  uint32_t input_side = 224;       // the model's input side: below-input-size (common ImageNet input)
  uint64_t min_class = 10;         // fewer images: small-class
  double max_imbalance = 10.0;     // largest/smallest class above this: class-imbalance
  double outlier_z = 3.5;          // robust z-score beyond which a value is unusual for its class
};

// The absolute floors of the exposure, information and focus checks (docs/checks.md).
// The policy sets only the z cut, so an image can be flagged near-uniform,
// underexposed, overexposed, low-entropy or unsharp only when it meets its floor.
inline constexpr double kFlatContrast = 3.0;  // luminance spread under this: near-uniform
inline constexpr double kDarkMean = 30.0, kBrightMean = 225.0, kLowEntropy = 3.0, kUnsharpFocus = 100.0;
// The codes above, in order; and which of their floors a readable image meets
// (bit k for kFloorCodes[k]; 0 for any other record).
inline constexpr const char* kFloorCodes[] = {"near-uniform", "underexposed", "overexposed", "low-entropy", "unsharp"};
unsigned quality_floors_met(const FileRecord& r);

// One `unreadable` finding per reason (error), one `no-label` (warning) for
// images directly in ROOT, one `link-not-followed` (info) and one
// `folder-unreadable` (warning) when the walk met such.
void check_inventory(const std::vector<FileRecord>& records, const Labelling& labels, const WalkResult& walk,
                     std::vector<Finding>& out);

// Findings about groups: `byte-identical` (warning) for each set of byte-identical
// files, `look-alike` (warning) for each group that is not all byte-identical,
// `label-conflict` (error) for a group whose images carry more than one label,
// `split-leak` (error) for a group spanning split folders of a pre-split tree, and
// `lookalike-chain` (warning) for a group whose diameter exceeds 2 * radius.
void check_groups(const std::vector<FileRecord>& records, const Labelling& labels, const GroupResult& groups,
                  const GroupSettings& settings, std::vector<Finding>& out);

// Findings about the split: `class-capped` (info) for classes cut by --per-class,
// `split-without-class` (warning) for a class with no image in a split whose share
// is above 0 (or, in a pre-split tree, in a split folder the tree has).
void check_split(const std::vector<FileRecord>& records, const Labelling& labels, const SplitOutcome& split,
                 const SplitSettings& settings, bool kept_folders, std::vector<Finding>& out);

// Image checks (sizes, exposure, focus, storage, orientation, privacy): one
// finding per code with every file it concerns; exposure and focus are judged
// against an absolute floor AND the class's own distribution (robust z-score from
// median and MAD), so a collection of night photos or line drawings is not
// flagged wholesale.
void check_images(const std::vector<FileRecord>& records, const Labelling& labels, const CheckSettings& settings,
                  std::vector<Finding>& out);

// Label checks: names that differ only in case, spaces, '_', '-' or a plural s;
// names one edit apart; small and empty classes; the imbalance ratio; stray files.
void check_labels(const std::vector<FileRecord>& records, const Labelling& labels, const WalkResult& walk,
                  const CheckSettings& settings, std::vector<Finding>& out);

// Class balance summary: imbalance ratio (largest/smallest class) and the
// normalised Shannon entropy of the class distribution (1 = perfectly balanced).
struct Balance {
  uint64_t largest = 0, smallest = 0;
  double imbalance_ratio = 0, normalized_entropy = 0;
};
Balance class_balance(const std::vector<FileRecord>& records, const Labelling& labels);

// Damerau-free Levenshtein distance (insertions, deletions, substitutions).
size_t edit_distance(std::string_view a, std::string_view b);

// The form two spellings of one class share: lower case, without spaces, '_',
// '-' and '.', and without a final 's' (for words of four letters or more).
std::string label_key(std::string_view name);

}  // namespace tamis
