#include "tamis/place/record_flags.h"

#include <algorithm>
#include <numeric>

namespace tamis {

RecordFlags record_flags(const std::vector<FileRecord>& records, const MaskPairing& masks,
                         const std::vector<Finding>& findings) {
  RecordFlags out;
  for (const auto& f : findings) out.codes.push_back(f.code);
  std::sort(out.codes.begin(), out.codes.end());
  out.codes.erase(std::unique(out.codes.begin(), out.codes.end()), out.codes.end());
  // Records are in path order (the walk's); a table of them in that order finds a path.
  std::vector<uint32_t> by_path(records.size());
  std::iota(by_path.begin(), by_path.end(), 0u);
  auto path_less = [&](uint32_t a, uint32_t b) { return records[a].path < records[b].path; };
  if (!std::is_sorted(by_path.begin(), by_path.end(), path_less)) std::sort(by_path.begin(), by_path.end(), path_less);
  auto below = [&](uint32_t i, const std::string& v) { return records[i].path < v; };
  for (const auto& f : findings) {
    const auto code = static_cast<uint32_t>(std::lower_bound(out.codes.begin(), out.codes.end(), f.code) - out.codes.begin());
    // A finding's paths are sorted (sort_findings): each is searched for from
    // where the last was found, by galloping (steps 1, 2, 4, ... then halving),
    // so a finding naming every file costs a pass, not a binary search a path.
    const bool sorted = std::is_sorted(f.paths.begin(), f.paths.end());
    auto from = by_path.begin();
    for (const auto& p : f.paths) {
      if (!sorted) from = by_path.begin();
      size_t step = 1;
      auto to = from;
      while (to != by_path.end() && below(*to, p)) {
        from = to + 1;
        to = static_cast<size_t>(by_path.end() - from) > step ? from + static_cast<long>(step) : by_path.end();
        step *= 2;
      }
      auto it = std::lower_bound(from, to, p, below);
      if (it != by_path.end() && records[*it].path == p) out.pairs.emplace_back(*it, code);
      from = it;
    }
  }
  std::sort(out.pairs.begin(), out.pairs.end());
  // An image carries its mask's findings too (an empty mask, a mask of another
  // size): the mask has no row of its own.
  std::vector<std::pair<uint32_t, uint32_t>> carried;
  for (size_t i = 0; i < records.size() && i < masks.mask_of.size(); ++i) {
    const int64_t m = masks.mask_of[i];
    if (m < 0) continue;
    auto lo = std::lower_bound(out.pairs.begin(), out.pairs.end(), std::pair<uint32_t, uint32_t>(static_cast<uint32_t>(m), 0u));
    for (; lo != out.pairs.end() && lo->first == static_cast<uint32_t>(m); ++lo)
      carried.emplace_back(static_cast<uint32_t>(i), lo->second);
  }
  out.pairs.insert(out.pairs.end(), carried.begin(), carried.end());
  std::sort(out.pairs.begin(), out.pairs.end());
  out.pairs.erase(std::unique(out.pairs.begin(), out.pairs.end()), out.pairs.end());
  return out;
}

}  // namespace tamis
