// The second candidate key: every pair of images whose match profiles' screen
// coefficients (match.h: 42 low DCT coefficients of the centred 32x32 gray
// thumbnail scaled to unit length, stored x 32767) lie within a radius of each
// other after some flip/turn of the first, found exactly, without comparing all
// pairs.
//
// Why: the DCT hash sets a bit when a coefficient is above the median of the 64.
// A drawing symmetric about an axis, or a pattern that varies along one axis
// only, has many coefficients near 0, where the median sits, and a sub-pixel
// shift flips half its bits: a copy's code can differ in 10-32 bits although
// the thumbnails correlate above 0.999 (docs/lookalikes.md). The coefficients
// themselves move little, and their direction least of all: a copy re-encoded,
// resampled or blurred loses detail above them, which changes their length in
// the unit-scaled thumbnail but hardly where they point.
//
// The key: the screen coefficients scaled to unit length among themselves,
// rounded to 1/32767 (screen_key; computed in double from the stored integers,
// correctly rounded, so the same on every processor). A profile that is flat,
// or whose coefficients are all 0, has no key.
//
// The rule (exact, in integers): the triple (8 i + t, j), i != j, is a hit when
// both have a key and screen_key_distance2(key i, t, key j) <= threshold2 =
// floor((R x 32767)^2). It is symmetric: (8 j + t^-1, i) is then a hit too,
// and both are returned.
//
// The search: each key is mapped to a point that no flip/turn changes (the
// absolute value of every coefficient a flip can negate, and each pair of
// transposed coefficients sorted), a map that moves no two points further
// apart, so any hit's two points lie within R of each other. The points are
// placed on a grid of cells R wide over the coordinates that vary most (as many
// as keep about four points a cell, at most kScreenGridDims), sorted by cell;
// each cell visits the cells within one step in every grid coordinate through
// the sorted order (a trie: only cells that exist are visited), compares the
// points in full (stopping as soon as a partial sum exceeds R^2), and each pair
// found is checked under all 8 flips/turns. Sorted output; the thread count
// changes nothing.
#pragma once

#include <array>
#include <cstdint>
#include <functional>
#include <utility>
#include <vector>

#include "tamis/relate/match.h"

namespace tamis {

inline constexpr int kScreenGridDims = 10;

using ScreenKey = std::array<int16_t, kScreenCoefficients>;

// The key of a profile (above); false when it has none.
bool screen_key(const MatchProfile& profile, ScreenKey& key);

// The squared distance between key a after flip/turn t and key b, in the
// stored units (x 32767^2): exact, in integers.
int64_t screen_key_distance2(const ScreenKey& a, int t, const ScreenKey& b);

// The same for two profiles; -1 when either has no key.
int64_t screen_distance2(const MatchProfile& a, int t, const MatchProfile& b);

// floor((radius x 32767)^2): the squared distance, in the stored units, that a
// hit may reach. 0 (radius <= 0) turns the key off.
int64_t screen_threshold(double radius);

// Every hit (8 i + t, j) among `profiles` within `threshold2` (screen_threshold)
// that `admit` accepts (all when empty), sorted, less those `keep` rejects.
// `found` (when set) receives the number of hits admitted, before `keep`. Both
// are called from the search's threads: thread-safe and pure.
using ScreenFilter = std::function<bool(uint32_t, uint32_t)>;
std::vector<std::pair<uint32_t, uint32_t>> screen_join(const std::vector<MatchProfile>& profiles, int64_t threshold2,
                                                       unsigned threads, const ScreenFilter& admit = {},
                                                       const ScreenFilter& keep = {}, uint64_t* found = nullptr);

// The same by comparing every pair under every flip/turn: the reference the
// search is tested against.
std::vector<std::pair<uint32_t, uint32_t>> screen_join_brute_force(const std::vector<MatchProfile>& profiles,
                                                                   int64_t threshold2);

}  // namespace tamis
