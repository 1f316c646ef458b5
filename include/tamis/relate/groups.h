// Groups: byte-identical files and look-alike images, joined into connected groups.
//
// Two readable images are joined when
//   - their bytes are identical (XXH3-128 content hash equal), or
//   - they look alike: the DCT hash of one of the 8 flips/turns of the first is
//     within Hamming distance `radius` of the second's DCT hash (candidates found
//     exactly by join_within, lookalike_index.h), or that flip/turn's screen
//     key (its 42 low DCT coefficients scaled to unit length) is within
//     `screen_radius` of the second's (the second key, found exactly by
//     screen_join, screen_join.h), AND the thumbnails confirm it:
//     the thumbnails, after that flip/turn, match (match.h: Pearson correlation of
//     the 32x32 gray thumbnails, the sharper blurred towards the other, at least
//     `match.min_correlation`, no window of 8x8 whose residual exceeds
//     `match.max_local`, and colour differences a global colour change explains,
//     within `match.max_chroma`). (The match profiles' bounds, match.h, drop hits
//     that provably cannot reach it before any thumbnail is compared; they never
//     change which pairs are joined.)
// Groups are the connected components (union-find) of these pairs, with two or
// more members. A group's diameter is the largest hash distance (best flip/turn)
// between two of its members, exact for groups up to 512 members and a lower
// bound (double sweep) above; a diameter beyond 2 * radius means a chain may have
// glued unrelated images together (finding `lookalike-chain`).
//
// Deterministic: groups are numbered in the order of their first member's path;
// pairs are sorted before union; thread count changes nothing.
#pragma once

#include <cstdint>
#include <functional>
#include <string>
#include <vector>

#include "tamis/model/group.h"
#include "tamis/model/record.h"
#include "tamis/relate/match.h"

namespace tamis {

struct GroupSettings {
  int radius = 8;                // docs/lookalikes.md: how the defaults were measured
  // The second candidate key (screen_join.h): pairs whose screen coefficients,
  // each set scaled to unit length, lie within screen_radius after some
  // flip/turn are candidates too, whatever their hashes. 0 turns it off.
  double screen_radius = 0.04;
  MatchSettings match;           // how a hash hit is confirmed (match.h)
  unsigned threads = 0;
  // The look-alike join's memory budget: its buffer of entries is searched in
  // slices of the key space that fit it, and above 125,000 images (at 64 MB) the
  // flips/turns are joined one at a time (same result, more time). 64 MB keeps a
  // million files within 1.5 KB of memory each (docs/performance.md).
  uint64_t join_memory_bytes = 64ull << 20;
};

// REQUIRES: thumbs.has(i) for every readable image i (the correlation needs them).
GroupResult find_groups(const std::vector<FileRecord>& records, const ThumbnailTable& thumbs,
                        const GroupSettings& settings);

// The look-alike join in slices, for a join that runs as tasks of a cluster
// engine (docs/scale-out.md). Slice s of S finds the confirmed look-alike pairs
// whose query image (the one whose 8 flips/turns are searched) is readable
// image k (in path order) with k mod S == s: every pair find_groups confirms is
// found by one or two slices, and the union of all S slices' pairs, given to
// groups_from_links, gives exactly find_groups' result. A slice reads only the
// thumbnails of the images its hits name, through `load` (which copies the
// thumbnails of `count` records, ascending, to out[0..]); it goes through its
// queries in batches whose hits stay within a budget taken from
// settings.join_memory_bytes, holds 128 bytes of profile for each image a
// batch's hits name, and thumbnails only for the hits the profiles let through.
struct LookalikeLinks {
  std::vector<GroupLink> links;  // record indices, a < b, one a pair, sorted
  uint64_t candidate_hits = 0;   // the slice's share of GroupResult::candidate_hits
};
using ThumbnailSource = std::function<void(const uint32_t* records, size_t count, Thumbnail* out)>;
LookalikeLinks join_lookalike_slice(const std::vector<FileRecord>& records, const GroupSettings& settings,
                                    uint32_t slice, uint32_t slices, const ThumbnailSource& load);
// The groups from the union of every slice's links (in any order; a pair found
// by two slices counts once, measured as find_groups measures it) and the sum of
// their candidate hits. Throws std::invalid_argument when a link names a record
// that is not a readable image.
GroupResult groups_from_links(const std::vector<FileRecord>& records, LookalikeLinks links);

// A string naming every setting and rule that changes the groups (kMatchRules
// and the settings' values, as bytes), for the cache's groups fingerprint.
std::string group_settings_key(const GroupSettings& settings);

// Smallest hash distance between a and b over the 8 flips/turns of a.
int lookalike_distance(const LookalikeCodes& a, const LookalikeCodes& b);

}  // namespace tamis
