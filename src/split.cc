#include "tamis/split.h"

#include <algorithm>
#include <map>
#include <numeric>
#include <sstream>
#include <stdexcept>

#include "tamis/random.h"

namespace tamis {

std::string_view to_string(Placement p) {
  switch (p) {
    case Placement::train: return "train";
    case Placement::val: return "val";
    case Placement::test: return "test";
    case Placement::excluded: break;
  }
  return "excluded";
}

std::array<uint32_t, 3> parse_split_spec(const std::string& spec) {
  std::vector<uint32_t> parts;
  std::stringstream ss(spec);
  std::string item;
  while (std::getline(ss, item, '/')) {
    if (item.empty() || item.size() > 3 || !std::all_of(item.begin(), item.end(), ::isdigit))
      throw std::invalid_argument("--split takes whole percentages like 70/15/15 or 80/20, got '" + spec + "'");
    parts.push_back(static_cast<uint32_t>(std::stoul(item)));
  }
  if (parts.size() != 2 && parts.size() != 3)
    throw std::invalid_argument("--split takes two or three parts (train/test or train/val/test), got '" + spec + "'");
  if (std::accumulate(parts.begin(), parts.end(), 0u) != 100)
    throw std::invalid_argument("--split parts must sum to 100, got '" + spec + "'");
  if (parts[0] == 0) throw std::invalid_argument("--split needs a train share above 0, got '" + spec + "'");
  if (parts.size() == 2) return {parts[0], 0, parts[1]};
  return {parts[0], parts[1], parts[2]};
}

std::array<uint64_t, 3> largest_remainder(uint64_t n, const std::array<uint32_t, 3>& percent) {
  std::array<uint64_t, 3> count{};
  std::array<uint64_t, 3> rem{};
  uint64_t given = 0;
  for (int s = 0; s < 3; ++s) {
    count[s] = n * percent[s] / 100;
    rem[s] = n * percent[s] % 100;
    given += count[s];
  }
  for (uint64_t left = n - given; left > 0; --left) {
    int best = -1;
    for (int s = 0; s < 3; ++s)
      if (percent[s] > 0 && (best < 0 || rem[s] > rem[best])) best = s;
    ++count[best];
    rem[best] = 0;
  }
  return count;
}

std::vector<Placement> assign_splits(const std::vector<SplitItem>& items, const std::vector<std::string>& names,
                                     const SplitSettings& settings) {
  std::vector<Placement> out(items.size(), Placement::excluded);
  // Units: a group id >= 0 joins its items; others stand alone. Keyed by first item index.
  std::map<int64_t, std::vector<size_t>> groups;
  std::vector<std::vector<size_t>> units;
  for (size_t i = 0; i < items.size(); ++i) {
    if (!items[i].eligible || items[i].label < 0) continue;
    if (items[i].group >= 0) {
      groups[items[i].group].push_back(i);
    } else {
      units.push_back({i});
    }
  }
  for (auto& [id, members] : groups) units.push_back(std::move(members));
  // Units are ordered by their first item (items come sorted by path), so the
  // order never depends on group id numbering.
  std::sort(units.begin(), units.end(), [](const auto& a, const auto& b) { return a.front() < b.front(); });

  std::vector<std::vector<size_t>> by_class(names.size());
  for (size_t u = 0; u < units.size(); ++u) {
    std::map<int32_t, size_t> votes;
    for (size_t i : units[u]) ++votes[items[i].label];
    int32_t cls = votes.begin()->first;
    size_t best = 0;
    for (auto [label, n] : votes)
      if (n > best) {
        best = n;
        cls = label;
      }
    by_class[static_cast<size_t>(cls)].push_back(u);
  }
  for (size_t c = 0; c < names.size(); ++c) {
    auto& cu = by_class[c];
    if (cu.empty()) continue;
    uint64_t total = 0;
    for (size_t u : cu) total += units[u].size();
    auto target = largest_remainder(total, settings.percent);
    SplitMix64 rng(settings.seed ^ fnv1a64(names[c]));
    seeded_shuffle(cu, rng);
    std::stable_sort(cu.begin(), cu.end(), [&](size_t a, size_t b) { return units[a].size() > units[b].size(); });
    std::array<int64_t, 3> need{int64_t(target[0]), int64_t(target[1]), int64_t(target[2])};
    for (size_t u : cu) {
      int best = 0;  // train always has a share above 0
      for (int s = 1; s < 3; ++s)
        if (settings.percent[s] > 0 && need[s] > need[best]) best = s;
      need[best] -= static_cast<int64_t>(units[u].size());
      for (size_t i : units[u]) out[i] = static_cast<Placement>(best);
    }
  }
  return out;
}

}  // namespace tamis
