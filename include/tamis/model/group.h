// Groups as data: the result of the look-alike stage (relate/groups.h) that
// the cache stores, the placing stage keeps whole and the reports show. Plain
// types and the rules that read them back; no computation.
#pragma once

#include <cstddef>
#include <cstdint>
#include <string>
#include <vector>

#include "tamis/model/record.h"

namespace tamis {

// The blur ladder's length (relate/match.h: sigma = 0.25 s thumbnail pixels for
// s = 0..kBlurSteps-1); a link names its step.
inline constexpr int kBlurSteps = 11;

// Why two members share a group: one of the links that joined the group.
struct GroupLink {
  uint32_t a = 0, b = 0;    // record indices, a < b
  int turn = -1;            // -1: byte-identical; else the flip/turn t of a (turn_thumbnail) that matches b
  float correlation = 1;    // the blur-matched correlation (match.h; 1 for byte-identical files)
  int blur_step = 0;        // the blur step that gave it (match.h blur_sigma; 0: none)
  bool blurred_a = false;   // the blur went on a (else on b), when blur_step > 0
  int fit_source = 0;       // the tone-and-colour fit gave it (match.h): 1 a was the fit's source, 2 b; 0 no fit
  bool resampled = false;   // measured after the larger picture's thumbnail passed through the smaller's size (match.h)
  int jpeg_quality = 0;     // measured after the other picture was re-encoded as b's JPEG at this IJG quality (a's when
                            // the flip/turn was a's own; match.h); 0: not
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

// The id a group is known by in every output: "g1", "g2", … (index + 1).
std::string group_id(int64_t index);

}  // namespace tamis
