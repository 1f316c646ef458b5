// Test support: planted sets for look-alike truth, both sides.
//  - planted_kinds(): the copies the look-alike search must join to their source,
//    many kinds and strengths (resampling with every interpolation, flips and
//    turns, re-encoding, tone and colour changes, light blur, sharpening, noise);
//  - rendered_scenes(): pictures that must NOT be joined: scenes that share one
//    smooth backdrop (a two-colour gradient) and differ by their objects, which
//    stand out from the backdrop in hue more than in brightness: other objects,
//    the same object moved, the same object in another colour, a small object
//    moved. The truth is constructed: every pair within a scene is distinct.
// Deterministic (seeded SplitMix64).
#pragma once

#include <cstdint>
#include <functional>
#include <string>
#include <vector>

#include <opencv2/core.hpp>

#include "tamis/relate/groups.h"
#include "tamis/model/record.h"

namespace tamis::test {

struct PlantedKind {
  std::string name;
  std::function<cv::Mat(const cv::Mat&)> make;  // the copied pixels (8-bit, 1 or 3 channels)
  int jpeg_quality;                              // 0: PNG
  bool colour_only = false;                      // a change of colour: planted on colour sources only
};

const std::vector<PlantedKind>& planted_kinds();

// The picture with its hue turned by `degrees` on the HSV circle (OpenCV's
// 8-bit HSV: hue in steps of 2 degrees), as the hue kinds make it.
cv::Mat hue_turned(const cv::Mat& m, int degrees);

struct Scene {
  std::vector<cv::Mat> pictures;  // BGR, all sharing one backdrop
  std::vector<std::string> how;   // per picture: how it differs from picture 0
};

// The look-alike features of a file's bytes, probed and decoded as an audit does
// (throws when the bytes do not decode).
Lookalike lookalike_of_bytes(const std::vector<uint8_t>& bytes);

// Whether find_groups would join a and b as a pair: some flip/turn of either has
// a hash within the radius of the other's, or a screen key (gray or value plane,
// screen_join.h) within screen_radius, and the thumbnails match (match.h),
// judged by pair_settings with the pictures' sizes (unknown by default: the
// allowance 1 and no resampled comparison).
bool pair_joined(const Lookalike& a, const Lookalike& b, const GroupSettings& gs, PictureSize size_a = {},
                 PictureSize size_b = {});
// A file's size and JPEG quality as the pair rules read them (probe_bytes).
PictureSize picture_of_bytes(const std::vector<uint8_t>& bytes);
// The same for pictures of the given sizes.
bool pair_joined(const Lookalike& a, cv::Size size_a, const Lookalike& b, cv::Size size_b, const GroupSettings& gs);

// Colour photographs from Debian packages, each cut into non-overlapping tiles (at
// most 384 px on the longer side): distinct pictures of many kinds (landscape,
// flowers, a room, portraits, a painting, a group photograph) to plant copies of,
// and, tiles of one photograph among themselves, distinct pictures that share
// their textures and colours. Sources are listed in planted.cc; a missing file is
// skipped.
std::vector<cv::Mat> photograph_tiles();

// `count` scenes of `per_scene` pictures (width x height), from `seed`.
std::vector<Scene> rendered_scenes(int count, int per_scene, int width, int height, uint64_t seed);

}  // namespace tamis::test
