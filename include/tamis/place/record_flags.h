// Which findings name which records: the one rule, used by the manifest's
// finding_codes and exclusion columns and by the split's leave-out
// (leave_out.h), so that what a row shows and what keeps it out of the split
// can never differ.
//
// Contract: (record index, index into `codes`) pairs, sorted, without repeats,
// so a record's codes are one run. A finding names the records whose paths it
// lists; an image also carries every code that names its mask (an empty mask,
// a mask of another size), since the mask has no row of its own. Memory grows
// with the findings' paths, not with the number of records. `codes` view the
// findings' strings: valid while the findings are.
#pragma once

#include <cstdint>
#include <string_view>
#include <utility>
#include <vector>

#include "tamis/model/findings.h"
#include "tamis/model/record.h"
#include "tamis/relate/masks.h"

namespace tamis {

struct RecordFlags {
  std::vector<std::string_view> codes;               // distinct finding codes, sorted
  std::vector<std::pair<uint32_t, uint32_t>> pairs;  // (record, code)
};

RecordFlags record_flags(const std::vector<FileRecord>& records, const MaskPairing& masks,
                         const std::vector<Finding>& findings);

}  // namespace tamis
