// The split: train/val/test (and optional folds), stratified by label, groups
// kept whole, seeded, reproducible anywhere. docs/splits.md has the rules.
//
// Input: one SplitItem per manifest row (its label, its group, whether it may be
// placed, its stable key, an earlier placement to keep). Every group is one
// unit: all its items share one split and one fold. A unit's class is the most
// common label among its items (ties: the smaller label index).
//
// Methods:
//  - shuffle (default): per class with N items and shares p_s, the target counts
//    follow the largest-remainder (Hamilton) rule: floor(N * p_s / 100) each, the
//    remaining items one each to the splits with the largest fractional parts,
//    ties to the earlier split (train, val, test): 7,000 at 70/15/15 is exactly
//    4900/1050/1050. Units are shuffled with SplitMix64 seeded from (seed, label),
//    then placed largest first (ties in shuffled order), each into the split
//    furthest below its target; without groups the targets are met exactly.
//  - stable: each unit's split comes from a keyed hash of (seed, its stable key)
//    alone, so adding files never moves a unit that was already placed; shares
//    then match the targets only on average.
// Keeping: items with an earlier placement keep it (a unit takes its members'
// most common earlier split); new units are placed as `shuffle` does, towards
// the class targets computed over old and new items together.
// Cap (per_class > 0): per class, whole units are taken in seeded order while
// they fit under the cap; the rest are `excluded` (capped).
// Folds (folds >= 2): the train and val items of each class are dealt into
// folds, units largest first in seeded order, each to the fold with the fewest
// items of that class (ties: the lower fold); test stays a hold-out.
//
// Deterministic: depends only on the items, the label names and the settings;
// never on thread count, file order or library versions. Pure function.
#pragma once

#include <array>
#include <cstdint>
#include <string>
#include <string_view>
#include <unordered_map>
#include <vector>

#include "tamis/relate/labels.h"

namespace tamis {

enum class SplitMethod : uint8_t { shuffle, stable };

struct SplitSettings {
  std::array<uint32_t, 3> percent{70, 15, 15};  // train, val, test; val is 0 for a two-part split
  uint64_t seed = 1;
  SplitMethod method = SplitMethod::shuffle;
  uint64_t per_class = 0;  // 0: no cap
  uint32_t folds = 0;      // 0: no folds; else >= 2
  bool resplit = false;    // pre-split trees: draw a new split instead of keeping the folders'
  // Kept out of the split (docs/splits.md, Leaving images out): images named by a
  // finding of one of these codes (or whose mask is), and, with one_per_group,
  // every member of a look-alike group but one (the most pixels, then the first path).
  std::vector<std::string> exclude_flagged;  // sorted, distinct
  bool one_per_group = false;
};

// Parses "70/15/15" or "80/20" (train/test). Throws std::invalid_argument with a
// readable message when the parts are not 2 or 3 whole numbers summing to 100.
std::array<uint32_t, 3> parse_split_spec(const std::string& spec);

enum class Placement : int8_t { excluded = -1, train = 0, val = 1, test = 2 };
std::string_view to_string(Placement p);
// "train" -> train, ...; anything else -> excluded.
Placement placement_from_string(std::string_view s);

struct SplitItem {
  int32_t label = -1;         // index into label names; -1 = no label
  int64_t group = -1;         // items sharing a group id >= 0 form one unit; -1 = alone
  bool eligible = true;       // false: the item is excluded (unreadable, no label, ...)
  std::string_view key;       // stable key (the path); a unit's key is its smallest
  Placement previous = Placement::excluded;  // earlier placement to keep (excluded = none)
};

// Earlier placements to keep (path -> split), e.g. read from a previous manifest.
using KeepMap = std::unordered_map<std::string, Placement>;

// Why an item ended up excluded (the manifest's `exclusion` column).
enum class Exclusion : uint8_t { none, not_eligible, capped, flagged, one_per_group, class_excluded };

struct SplitOutcome {
  std::vector<Placement> placement;  // per item
  std::vector<int32_t> fold;         // per item: 0..folds-1, or -1
  std::vector<Exclusion> why;        // per item
  uint64_t kept = 0;                 // items that kept an earlier placement
};

// Largest-remainder counts for n items at the given percentages.
std::array<uint64_t, 3> largest_remainder(uint64_t n, const std::array<uint32_t, 3>& percent);

// The keyed hash behind the stable method: SplitMix64's finaliser over the key's
// FNV-1a and the seed; uniform over 64 bits.
uint64_t stable_hash(uint64_t seed, std::string_view key);

SplitOutcome assign_splits(const std::vector<SplitItem>& items, const std::vector<std::string>& label_names,
                           const SplitSettings& settings);

}  // namespace tamis
