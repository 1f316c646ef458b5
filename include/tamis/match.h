// Look-alike confirmation: whether two thumbnails (record.h: 32x32 gray and 8x8
// chroma) that the hash join put side by side show the same picture.
//
// Three measurements, all after the hit's flip/turn, each from a published or
// textbook quantity:
//  - correlation: the Pearson correlation of the gray thumbnails (unchanged by
//    brightness and contrast);
//  - local: the gray residual between the two standardized thumbnails (zero
//    mean, unit variance), its mean square in the worst 8x8 window (windows at a
//    step of 4). The global mean square is 2 (1 - correlation); a copy spreads its
//    differences (re-encoding, resampling, noise) over the picture, while a moved,
//    added or removed object concentrates them in a window. It catches pictures
//    on a shared smooth backdrop whose correlation is high because the backdrop
//    dominates the variance;
//  - chroma: the share of the colour variation that no global colour change
//    explains. The less colourful thumbnail's 8x8 chroma z = Cb + i Cr is fitted
//    by least squares as alpha z' + beta of the other's (complex alpha: a hue
//    rotation and a saturation scale; beta: a white-balance shift; alpha = 0 is a
//    conversion to gray); the residual's sum of squares over the target's
//    variation (plus a noise floor of 1.5 levels a cell). Objects that
//    differ from the backdrop in hue only, in different places or colours, leave
//    most of it unexplained. Not measured (-1) when neither side has colour
//    variation above 2 levels.
// Two thumbnails are joined when correlation >= min_correlation, local <=
// max_local and (chroma < 0 or chroma <= max_chroma). Flat thumbnails (standard
// deviation below 2 grey levels) follow thumb_correlation's flat rule alone.
// docs/lookalikes.md: how the defaults were measured. Pure; thread-safe.
#pragma once

#include "tamis/features.h"
#include "tamis/record.h"

namespace tamis {

struct MatchSettings {
  double min_correlation = 0.995;
  double max_local = 0.06;
  double max_chroma = 0.35;
};

struct Match {
  bool joined = false;
  float correlation = 0;
  float local = 0;
  float chroma = -1;  // -1: not measured (no colour variation on either side)
};

// `turned_a`: the first thumbnail after the hit's flip/turn (turn_thumbnail).
Match match_thumbnails(const Thumbnail& turned_a, const ThumbStats& sa, const Thumbnail& b, const ThumbStats& sb,
                       const MatchSettings& settings);

// The same for a's transform t (turns it first).
Match match_thumbnails(const Thumbnail& a, int t, const Thumbnail& b, const MatchSettings& settings);

}  // namespace tamis
