// Checks: findings about the inventory, computed from records and labels.
//
// Each check is a pure function of the audit data; it adds Findings and never
// prints or writes. This file holds the checks of the reading stage (unreadable
// files, files without a label, links not followed, folders not listed).
#pragma once

#include <vector>

#include "tamis/findings.h"
#include "tamis/labels.h"
#include "tamis/record.h"
#include "tamis/walk.h"

namespace tamis {

// One `unreadable` finding per reason (error), one `no-label` (warning) for
// images directly in ROOT, one `link-not-followed` (info) and one
// `folder-unreadable` (warning) when the walk met such.
void check_inventory(const std::vector<FileRecord>& records, const Labelling& labels, const WalkResult& walk,
                     std::vector<Finding>& out);

}  // namespace tamis
