// Leaving images out of the split before it is drawn (docs/splits.md, Leaving
// images out): images flagged by chosen findings, and all but one member of each
// look-alike group.
//
// Contract:
// - A readable image (never a mask or an unreadable file, which are out anyway)
//   is left out as `flagged` when one of settings.exclude_flagged is among the
//   codes record_flags gives it (record_flags.h: findings that name it or its
//   mask), the codes its manifest row shows.
// - With settings.one_per_group, in each group every eligible member but one is
//   left out as `one_per_group`: the one kept has the most pixels (width x
//   height as stored), then the first path (the smallest record index). Members
//   already flagged, unreadable or without a class take no part.
// - Returns, per record, why it is left out (Exclusion::none: it is not). Pure;
//   depends only on its arguments.
// - The codes must be ones whose findings exist before the split: see
//   excludable_code.
#pragma once

#include <string_view>
#include <vector>

#include "tamis/model/findings.h"
#include "tamis/model/group.h"
#include "tamis/model/record.h"
#include "tamis/place/split.h"
#include "tamis/relate/labels.h"
#include "tamis/relate/masks.h"

namespace tamis {

std::vector<Exclusion> leave_out(const std::vector<FileRecord>& records, const Labelling& labels, const MaskPairing& masks,
                                 const GroupResult& groups, const std::vector<Finding>& findings,
                                 const SplitSettings& settings);

// Whether images can be left out by this code: a code of the catalogue whose
// findings are made before the split (not class-capped or split-without-class,
// which the split makes, nor too-many-unreadable, which names no image).
bool excludable_code(std::string_view code);

}  // namespace tamis
