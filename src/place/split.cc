#include "tamis/place/split.h"

#include <algorithm>
#include <map>
#include <numeric>
#include <sstream>
#include <stdexcept>

#include "tamis/base/random.h"

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

Placement placement_from_string(std::string_view s) {
  if (s == "train") return Placement::train;
  if (s == "val") return Placement::val;
  if (s == "test") return Placement::test;
  return Placement::excluded;
}

uint64_t stable_hash(uint64_t seed, std::string_view key) {
  uint64_t z = fnv1a64(key) ^ (seed * 0x9e3779b97f4a7c15ULL);
  z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ULL;
  z = (z ^ (z >> 27)) * 0x94d049bb133111ebULL;
  return z ^ (z >> 31);
}

namespace {

struct Unit {
  std::vector<size_t> items;  // ascending
  std::string_view key;       // smallest member key
  Placement previous = Placement::excluded;
};

// Places `order` (units of one class, already in placement order) greedily: each
// into the allowed split with the largest remaining need.
void place_by_need(const std::vector<size_t>& order, const std::vector<Unit>& units, std::array<int64_t, 3> need,
                   const std::array<uint32_t, 3>& percent, std::vector<Placement>& out) {
  for (size_t u : order) {
    int best = 0;  // train always has a share above 0
    for (int s = 1; s < 3; ++s)
      if (percent[s] > 0 && need[s] > need[best]) best = s;
    need[best] -= static_cast<int64_t>(units[u].items.size());
    for (size_t i : units[u].items) out[i] = static_cast<Placement>(best);
  }
}

// Seeded order of a class's units: shuffled, then largest first (stable).
std::vector<size_t> seeded_order(std::vector<size_t> cu, const std::vector<Unit>& units, uint64_t seed,
                                 std::string_view label, uint64_t stream) {
  SplitMix64 rng(seed ^ fnv1a64(label) ^ (stream * 0xd1b54a32d192ed03ULL));
  seeded_shuffle(cu, rng);
  std::stable_sort(cu.begin(), cu.end(), [&](size_t a, size_t b) { return units[a].items.size() > units[b].items.size(); });
  return cu;
}

}  // namespace

SplitOutcome assign_splits(const std::vector<SplitItem>& items, const std::vector<std::string>& names,
                           const SplitSettings& settings) {
  SplitOutcome out;
  out.placement.assign(items.size(), Placement::excluded);
  out.fold.assign(items.size(), -1);
  out.why.assign(items.size(), Exclusion::none);
  // Units: a group id >= 0 joins its items; others stand alone.
  std::map<int64_t, std::vector<size_t>> groups;
  std::vector<Unit> units;
  for (size_t i = 0; i < items.size(); ++i) {
    if (!items[i].eligible || items[i].label < 0) {
      out.why[i] = Exclusion::not_eligible;
      continue;
    }
    if (items[i].group >= 0) {
      groups[items[i].group].push_back(i);
    } else {
      units.push_back({{i}, {}, Placement::excluded});
    }
  }
  for (auto& [id, members] : groups) units.push_back({std::move(members), {}, Placement::excluded});
  // Ordered by first item (items come sorted by path): independent of group numbering.
  std::sort(units.begin(), units.end(), [](const Unit& a, const Unit& b) { return a.items.front() < b.items.front(); });
  for (auto& u : units) {
    u.key = items[u.items.front()].key;
    std::array<size_t, 3> votes{};
    for (size_t i : u.items) {
      if (items[i].key < u.key) u.key = items[i].key;
      if (items[i].previous != Placement::excluded) ++votes[static_cast<size_t>(items[i].previous)];
    }
    size_t best = 0;
    for (int s = 0; s < 3; ++s)
      if (votes[s] > best) {
        best = votes[s];
        u.previous = static_cast<Placement>(s);
      }
  }

  std::vector<std::vector<size_t>> by_class(names.size());
  for (size_t u = 0; u < units.size(); ++u) {
    std::map<int32_t, size_t> votes;
    for (size_t i : units[u].items) ++votes[items[i].label];
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
    std::vector<size_t> cu = by_class[c];
    if (cu.empty()) continue;
    // Cap: whole units in seeded order while they fit.
    if (settings.per_class > 0) {
      std::vector<size_t> taken;
      uint64_t total = 0;
      for (size_t u : seeded_order(cu, units, settings.seed, names[c], 1)) {
        bool kept_before = units[u].previous != Placement::excluded;
        if (kept_before || total + units[u].items.size() <= settings.per_class) {
          taken.push_back(u);
          total += units[u].items.size();
        } else {
          for (size_t i : units[u].items) out.why[i] = Exclusion::capped;
        }
      }
      std::sort(taken.begin(), taken.end());
      cu = std::move(taken);
    }
    // Units with an earlier placement keep it.
    std::vector<size_t> fresh;
    std::array<int64_t, 3> have{};
    uint64_t total = 0;
    for (size_t u : cu) {
      total += units[u].items.size();
      if (units[u].previous != Placement::excluded) {
        for (size_t i : units[u].items) out.placement[i] = units[u].previous;
        have[static_cast<size_t>(units[u].previous)] += static_cast<int64_t>(units[u].items.size());
        out.kept += units[u].items.size();
      } else {
        fresh.push_back(u);
      }
    }
    if (settings.method == SplitMethod::stable) {
      const double train = settings.percent[0] / 100.0, val = settings.percent[1] / 100.0;
      for (size_t u : fresh) {
        double x = static_cast<double>(stable_hash(settings.seed, units[u].key) >> 11) * 0x1.0p-53;
        Placement p = x < train ? Placement::train : x < train + val ? Placement::val : Placement::test;
        if (p == Placement::val && settings.percent[1] == 0) p = Placement::test;
        for (size_t i : units[u].items) out.placement[i] = p;
      }
    } else {
      auto target = largest_remainder(total, settings.percent);
      std::array<int64_t, 3> need{};
      for (int s = 0; s < 3; ++s) need[s] = static_cast<int64_t>(target[s]) - have[s];
      place_by_need(seeded_order(fresh, units, settings.seed, names[c], 0), units, need, settings.percent,
                    out.placement);
    }
    // Folds over the class's train and val units.
    if (settings.folds >= 2) {
      std::vector<size_t> foldable;
      for (size_t u : cu)
        if (out.placement[units[u].items.front()] != Placement::test) foldable.push_back(u);
      std::vector<uint64_t> fill(settings.folds, 0);
      for (size_t u : seeded_order(foldable, units, settings.seed, names[c], 2)) {
        size_t f = static_cast<size_t>(std::min_element(fill.begin(), fill.end()) - fill.begin());
        fill[f] += units[u].items.size();
        for (size_t i : units[u].items) out.fold[i] = static_cast<int32_t>(f);
      }
    }
  }
  return out;
}

}  // namespace tamis
