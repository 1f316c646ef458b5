// Checks: findings about the inventory, computed from records and labels.
//
// Each check is a pure function of the audit data; it adds Findings and never
// prints or writes. This file holds the checks of the reading stage (unreadable
// files, files without a label, links not followed, folders not listed).
#pragma once

#include <vector>

#include "tamis/findings.h"
#include "tamis/groups.h"
#include "tamis/labels.h"
#include "tamis/split.h"
#include "tamis/record.h"
#include "tamis/walk.h"

namespace tamis {

// One `unreadable` finding per reason (error), one `no-label` (warning) for
// images directly in ROOT, one `link-not-followed` (info) and one
// `folder-unreadable` (warning) when the walk met such.
void check_inventory(const std::vector<FileRecord>& records, const Labelling& labels, const WalkResult& walk,
                     std::vector<Finding>& out);

// Findings about groups: `exact-duplicate` (warning) for each set of byte-identical
// files, `near-duplicate` (warning) for each group that is not all byte-identical,
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

}  // namespace tamis
