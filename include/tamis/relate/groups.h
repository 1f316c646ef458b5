// Groups: byte-identical files and look-alike images, joined into connected groups.
//
// Two readable images are joined when
//   - their bytes are identical (XXH3-128 content hash equal), or
//   - they look alike: the DCT hash of one of the 8 flips/turns of the first is
//     within Hamming distance `radius` of the second's DCT hash (candidates found
//     exactly by join_within, lookalike_index.h), AND the independent second signal confirms it:
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
#include <string>
#include <vector>

#include "tamis/model/group.h"
#include "tamis/model/record.h"
#include "tamis/relate/match.h"

namespace tamis {

struct GroupSettings {
  int radius = 8;                // docs/lookalikes.md: how the defaults were measured
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

// A string naming every setting and rule that changes the groups (kMatchRules
// and the settings' values, as bytes), for the cache's groups fingerprint.
std::string group_settings_key(const GroupSettings& settings);

// Smallest hash distance between a and b over the 8 flips/turns of a.
int lookalike_distance(const LookalikeCodes& a, const LookalikeCodes& b);

}  // namespace tamis
