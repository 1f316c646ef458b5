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

#include "tamis/match.h"
#include "tamis/record.h"

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

// Why two members share a group: one of the links that joined the group.
struct GroupLink {
  uint32_t a = 0, b = 0;    // record indices, a < b
  int turn = -1;            // -1: byte-identical; else the flip/turn t of a (turn_thumbnail) that matches b
  float correlation = 1;    // the blur-matched correlation (match.h; 1 for byte-identical files)
  int blur_step = 0;        // the blur step that gave it (match.h blur_sigma; 0: none)
  bool blurred_a = false;   // the blur went on a (else on b), when blur_step > 0
  int fit_source = 0;       // the tone-and-colour fit gave it (match.h): 1 a was the fit's source, 2 b; 0 no fit
};
// The name of a flip/turn t in the outputs: "none", "mirror", "upside-down",
// "turn-180", "transpose", "turn-90" (clockwise), "turn-270", "anti-transpose".
const char* turn_name(int t);
// Whether a link read back (cache, index) fits a set of n records.
bool link_in_range(const GroupLink& l, size_t n);

struct Group {
  std::vector<uint32_t> members;  // record indices, ascending (= path order)
  // members.size() - 1 links that connect the members: the pairs that joined two
  // parts of the group, byte-identical pairs first (in content-hash order), then
  // look-alike pairs in (a, b) order, each measured by its first hit in
  // (a, b, turn) order.
  std::vector<GroupLink> links;
  bool exact = false;             // every member byte-identical to every other
  int diameter = 0;               // hash distance, see above
  bool diameter_exact = true;
};

struct GroupResult {
  std::vector<Group> groups;        // ordered by first member
  std::vector<int64_t> group_of;    // per record: index into groups, or -1
  uint64_t exact_pairs = 0;         // pairs of byte-identical files (within runs)
  uint64_t candidate_hits = 0;      // (image, flip/turn, image) triples within the radius
  uint64_t confirmed_pairs = 0;     // hits confirmed by the thumbnail correlation
};

// REQUIRES: thumbs.has(i) for every readable image i (the correlation needs them).
GroupResult find_groups(const std::vector<FileRecord>& records, const ThumbnailTable& thumbs,
                        const GroupSettings& settings);

// The id a group is known by in every output: "g1", "g2", … (index + 1).
std::string group_id(int64_t index);

// Smallest hash distance between a and b over the 8 flips/turns of a.
int lookalike_distance(const LookalikeCodes& a, const LookalikeCodes& b);

}  // namespace tamis
