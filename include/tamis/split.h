// The split: train/val/test assignment, stratified by label, groups kept whole.
//
// Input: one SplitItem per manifest row (its label, its group, whether it may be
// placed). Every group is one unit: all its items go to the same split. A unit's
// class is the most common label among its items (ties: the smaller label index).
//
// Per class with N items and shares p_s (percent), the target counts follow the
// largest-remainder (Hamilton) rule: floor(N * p_s / 100) each, then the items
// left over go one each to the splits with the largest fractional remainders,
// ties to the earlier split (train, val, test). 7,000 at 70/15/15 is exactly
// 4900/1050/1050. Units are shuffled with SplitMix64 seeded from (seed, label
// name), then placed largest first (ties in shuffled order), each into the split
// that is furthest below its target; with no groups the targets are met exactly.
//
// Deterministic: depends only on the items, the label names and the settings;
// never on thread count, file order or library versions.
#pragma once

#include <array>
#include <cstdint>
#include <string>
#include <vector>

#include "tamis/labels.h"

namespace tamis {

struct SplitSettings {
  std::array<uint32_t, 3> percent{70, 15, 15};  // train, val, test; val is 0 for a two-part split
  uint64_t seed = 1;
};

// Parses "70/15/15" or "80/20" (train/test). Throws std::invalid_argument with a
// readable message when the parts are not 2 or 3 whole numbers summing to 100.
std::array<uint32_t, 3> parse_split_spec(const std::string& spec);

struct SplitItem {
  int32_t label = -1;     // index into label names; -1 = no label
  int64_t group = -1;     // items sharing a group id >= 0 form one unit; -1 = alone
  bool eligible = true;   // false: the item is excluded (unreadable, no label, ...)
};

enum class Placement : int8_t { excluded = -1, train = 0, val = 1, test = 2 };
std::string_view to_string(Placement p);

// Largest-remainder counts for n items at the given percentages.
std::array<uint64_t, 3> largest_remainder(uint64_t n, const std::array<uint32_t, 3>& percent);

std::vector<Placement> assign_splits(const std::vector<SplitItem>& items, const std::vector<std::string>& label_names,
                                     const SplitSettings& settings);

}  // namespace tamis
