#include "tamis/place/leave_out.h"

#include <algorithm>
#include <unordered_map>

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
    std::unordered_map<std::string_view, uint32_t> index;
    index.reserve(records.size());
    for (uint32_t i = 0; i < records.size(); ++i) index.emplace(records[i].path, i);
    std::vector<bool> named(records.size(), false);
    for (const auto& f : findings) {
      if (!std::binary_search(settings.exclude_flagged.begin(), settings.exclude_flagged.end(), f.code)) continue;
      for (const auto& p : f.paths) {
        const auto it = index.find(p);
        if (it != index.end()) named[it->second] = true;
      }
    }
    for (size_t i = 0; i < records.size(); ++i) {
      const int64_t m = i < masks.mask_of.size() ? masks.mask_of[i] : -1;
      if (records[i].kind == FileKind::image && (named[i] || (m >= 0 && named[static_cast<size_t>(m)])))
        why[i] = Exclusion::flagged;
    }
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
