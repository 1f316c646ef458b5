#include "tamis/place/leave_out.h"

#include <algorithm>

#include "tamis/place/record_flags.h"

namespace tamis {

bool excludable_code(std::string_view code) {
  if (code == "class-capped" || code == "split-without-class" || code == "too-many-unreadable") return false;
  return finding_kind(code) != nullptr;
}

std::vector<Exclusion> leave_out(const std::vector<FileRecord>& records, const Labelling& labels, const MaskPairing& masks,
                                 const GroupResult& groups, const std::vector<Finding>& findings,
                                 const SplitSettings& settings) {
  std::vector<Exclusion> why(records.size(), Exclusion::none);
  if (!settings.exclude_flagged.empty()) {
    // The codes each record's manifest row shows (its mask's included).
    const RecordFlags flags = record_flags(records, masks, findings);
    for (const auto& [i, code] : flags.pairs)
      if (records[i].kind == FileKind::image &&
          std::binary_search(settings.exclude_flagged.begin(), settings.exclude_flagged.end(), flags.codes[code]))
        why[i] = Exclusion::flagged;
  }
  if (settings.one_per_group) {
    auto eligible = [&](uint32_t i) {
      return records[i].kind == FileKind::image && labels.label_of[i] >= 0 && why[i] == Exclusion::none;
    };
    for (const auto& g : groups.groups) {
      int64_t keep = -1;
      uint64_t best = 0;
      for (uint32_t i : g.members) {  // ascending record index: path order
        if (!eligible(i)) continue;
        const uint64_t pixels = uint64_t{records[i].probe.width} * records[i].probe.height;
        if (keep < 0 || pixels > best) {
          keep = i;
          best = pixels;
        }
      }
      for (uint32_t i : g.members)
        if (eligible(i) && static_cast<int64_t>(i) != keep) why[i] = Exclusion::one_per_group;
    }
  }
  return why;
}

}  // namespace tamis
