// Look-alike confirmation: whether two thumbnails (record.h: 32x32 gray and
// 32x32 chroma) that the hash join put side by side show the same picture.
//
// Four measurements, all after the hit's flip/turn, each from a published or
// textbook quantity:
//  - blur-matched correlation: the Pearson correlation of the gray thumbnails
//    (unchanged by brightness and contrast) after the sharper one is blurred
//    towards the other. A copy that was resized down, blurred or re-encoded has
//    lost fine detail, and its correlation with a sharp source falls (to 0.82 for
//    sigma 1 px on 28 px pictures) although nothing else changed. The blur is the
//    heat kernel of the thumbnail's grid (reflecting edges): the orthonormal
//    DCT-II coefficient (u, v) is multiplied by exp(-tau lambda_uv), lambda_uv =
//    4 sin^2(pi u / 64) + 4 sin^2(pi v / 64) (the eigenvalues of the grid's
//    Laplacian; a Gaussian of sigma = sqrt(2 tau) px at low frequencies). tau is
//    taken from a ladder, sigma = 0.25 s px for steps s = 0..kBlurSteps-1; which
//    side is sharper and by how much comes from each thumbnail's spectral moments
//    (the mean and spread of lambda under its power spectrum, computed exactly in
//    integers from pixel differences), and the steps tried are the ladder's
//    neighbours of that estimate (blur_candidates). The correlation is the best
//    over no blur and those steps;
//  - tone-and-colour fit: when neither reaches min_correlation but the plain
//    correlation reaches fit_floor, one side's gray plane is fitted by least
//    squares from the other's pixels: a cubic tone curve of the gray level (a
//    gamma, or a contrast or brightness change that clips at one end, which the
//    linear Pearson correlation cannot follow), and, when the source has colour,
//    linear terms in its chroma (bilinear from the 8x8 cells: Cb, Cr, and the
//    largest and smallest of R - Y, G - Y, B - Y, which is how an HSV hue or
//    saturation change moves the gray level of coloured pixels), and, when the
//    pair's colours changed as a whole (an HSV turn and saturation factor of
//    the cells that explain the other side's chroma), the gray change that this
//    change makes to each pixel's own colour (from the 32x32 chroma). Such pairs,
//    both sides in colour, are fitted from a plain correlation of
//    kColourFitFloor. The correlation is then sqrt(explained share), the better
//    of the two ways round, and the local check measures the fit's residual;
//  - local: the residual between the two standardized thumbnails (zero mean, unit
//    variance; the sharper after its blur), its mean square in the worst 8x8
//    window (windows at a step of 4). The global mean square is 2 (1 -
//    correlation); a copy spreads its differences (re-encoding, resampling,
//    noise) over the picture, while a moved, added or removed object concentrates
//    them in a window. It catches pictures on a shared smooth backdrop whose
//    correlation is high because the backdrop dominates the variance;
//  - chroma: the share of the colour variation that no global colour change
//    explains. The less colourful thumbnail's chroma in 8x8 cells (means of
//    4x4 pixels) z = Cb + i Cr is fitted
//    by least squares as alpha z' + gamma y' + beta of the other's chroma z' and
//    luma cells y' (complex alpha: a hue rotation and a saturation scale; gamma:
//    the cast that grows with brightness, which gains on red and blue leave, held
//    within |gamma| <= 0.15; beta: a constant shift; alpha = 0 is a conversion to
//    gray); the residual's sum of squares over the target's
//    variation (plus a noise floor of 1.5 levels a cell). Objects that
//    differ from the backdrop in hue only, in different places or colours, leave
//    most of it unexplained. Not measured (-1) when neither side has colour
//    variation above 2 levels.
//  - hue turn: when the fitted alpha turns the chroma by 20 degrees or more,
//    the turn must be one of the whole picture about neutral gray, as editors
//    turn hue on the HSV circle: each 8x8 cell's colour of the more colourful
//    side, turned on the HSV circle by the best angle and scaled by one
//    saturation factor, leaves at most 5% of the other side's chroma (about
//    neutral, no constant shift) unexplained. An object repainted on a weakly
//    coloured backdrop passes the chroma check (beta and gamma absorb the
//    backdrop) but not this one.
// Two imitations for small pictures, each tried only when the comparison as
// the thumbnails are does not join the pair (pair_settings says when):
//  - resampled: a picture under 32 px and a larger one; the larger thumbnail is
//    taken back to its pixels, reduced to the smaller size as the programs that
//    reduce pictures do, and enlarged as features.cc enlarges;
//  - re-encoded: a small JPEG and a picture of its size; the other is
//    re-encoded as the IJG library would at the JPEG's quality.
// Then the measurements above are taken again, at a closer threshold.
// Two thumbnails are joined when correlation (plain, blurred or fitted) >= min_correlation (for
// pictures under small_side pixels a closer one: pair_settings), local <=
// max_local, (chroma < 0 or chroma <= max_chroma and chroma_local <=
// max_chroma_local) and the hue turn holds. Flat
// thumbnails (standard deviation below 2 grey levels) follow thumb_correlation's
// flat rule for the gray pictures, and then the colour checks.
//
// The screen: most hash hits are far from any match, and the exact correlation
// needs both thumbnails' full DCTs. match_may_join() rejects a hit only when the
// low 8x8 DCT blocks prove the blur-matched correlation below min_correlation
// and the plain correlation below fit_floor for certain (see match.cc for the
// bound), so a screened search joins exactly the pairs that match_thumbnails
// joins.
// docs/lookalikes.md: how the defaults were measured. Pure; thread-safe.
#pragma once

#include <array>
#include <cstdint>
#include <vector>

#include "tamis/model/group.h"
#include "tamis/model/record.h"
#include "tamis/read/features.h"
#include "tamis/read/jpeg_quality.h"

namespace tamis {

// The version of the rules above, part of the cache's groups fingerprint so that
// groups found by older rules are never reused (1: correlation, local and colour
// checks; 2: the correlation blur-matched; 3: the tone-and-colour fit, and the
// colour check's luma term; 4: a turn of the chroma only as a hue turn of the
// whole picture, and the colour checks for pictures whose gray is flat; 5: the
// colour check's local share; 6: a closer correlation for pictures under
// small_side; 7: the second candidate key, screen_radius; 8: 32x32 chroma, a
// whole-picture HSV change modelled in the fit, and fitted from kColourFitFloor;
// 9: the resampled comparison of pictures of different sizes; 10: the
// re-encoded comparison of small JPEGs).
inline constexpr int kMatchRules = 10;

struct MatchSettings {
  double min_correlation = 0.995;
  double max_local = 0.06;
  double max_chroma = 0.35;
  double max_chroma_local = 0.7;
  // The tone-and-colour fit is tried for pairs whose plain correlation reaches
  // fit_floor (at or above min_correlation: never) and whose profiles' bound on
  // the blur-matched correlation reaches fit_gate().
  double fit_floor = 0.98;
  // Pictures under small_side pixels on a side (0: none) hold less than their
  // enlarged 32x32 thumbnail shows, and distinct ones correlate more closely: a
  // pair with such a picture must come closer than min_correlation
  // (size_allowance, pair_settings; docs/lookalikes.md).
  double small_side = 28;
  // Set per pair by pair_settings (not a setting of its own): when one picture
  // is smaller than the other and under kThumbSide pixels on a side, the larger
  // one's thumbnail is also compared after passing through the smaller one's
  // pixel size (resample_thumbnail), at resample.min_correlation.
  struct Resample {
    int width = 0, height = 0;              // the smaller picture's size, in b's frame (0: no resampled comparison)
    int large_width = 0, large_height = 0;  // the larger one's
    bool on_a = true;                       // the larger picture is a (else b)
    double min_correlation = 1;
  } resample;
  // Set per pair by pair_settings: when b is a JPEG under 32 px of at most
  // kJpegMaxQuality and a has its size, a's thumbnail is also compared after
  // the re-encoding that b's quality implies (jpeg_thumbnail), at
  // jpeg.min_correlation.
  struct Jpeg {
    int width = 0, height = 0, quality = 0;  // b's size and IJG quality (0: no re-encoded comparison)
    double min_correlation = 1;
  } jpeg;
};

// A picture's pixel size as the pair rules read it (0: unknown), each side held
// under 65,536, and, for a JPEG whose pixels are stored as they are shown (no
// EXIF turn), its IJG quality (ProbeInfo::jpeg_quality; else 0).
struct PictureSize {
  uint16_t width = 0, height = 0;
  uint8_t jpeg_quality = 0;
};
PictureSize picture_size(uint32_t width, uint32_t height, uint8_t jpeg_quality = 0);
// A record's: its probe's size, and its JPEG quality when its samples are 8-bit
// and no EXIF orientation turns its pixels.
PictureSize picture_size(const ProbeInfo& probe);

// The share of the correlation's allowance (1 - min_correlation) that a picture
// of width x height pixels gets: 1 when both sides reach small_side, else
// min(width, small_side) min(height, small_side) / small_side^2: the allowance
// in proportion to the picture's own pixels. Measured on Fashion-MNIST reduced
// to 12-24 px (bench/small_pictures): distinct pictures of those sizes are then
// joined at most about twice as often, pair for pair, as at 28 px (without it,
// 4-34 times); the power 1.5 would match 28 px at 24 px too but loses most
// tone-changed and re-encoded copies at 12-14 px. Unknown sizes (0) get 1.
float size_allowance(uint32_t width, uint32_t height, const MatchSettings& settings);

// The settings a pair is judged by: min_correlation moved towards 1 by the
// geometric mean of the two pictures' allowances (1 - (1 - min_correlation) x
// sqrt(share_a share_b)). A small picture against a large one is judged between
// the two: on Fashion-MNIST with a tenth of the pictures reduced to 14 px by
// Pillow's bilinear filter, the smaller allowance alone would also lose every
// reduced copy, and the larger alone joined 69 small-large pairs of distinct
// pictures, 3 across classes (bench/mixed_sizes.py); the mean joins 5, none
// across classes.
//
// A pair whose smaller picture is at most kResampleArea of the larger one's area,
// no wider and no taller (in b's frame, after a's flip/turn t), and under
// kThumbSide pixels on a side, also gets a resampled comparison (Resample): a
// copy reduced to 14 px from 28 px has lost what its enlarged thumbnail cannot
// show, and no blur of the sharper thumbnail imitates the loss (Fashion-MNIST
// halves: blur-matched 0.993-0.996 against 0.9975 needed). After the larger
// thumbnail has passed through the smaller size, both show what the smaller
// picture holds, and the pair is judged as two pictures of that size: at the
// smaller picture's own allowance (min_correlation moved towards 1 by it).
//
// A pair whose b is a JPEG of at most kJpegMaxQuality, at most 32 px on a side,
// and whose a has b's size in b's frame and is no JPEG or one of a higher
// quality (a JPEG re-encoded at its own quality changes little), also gets a re-encoded
// comparison (Jpeg): a's thumbnail re-encoded as the IJG library encodes at b's
// quality (jpeg_thumbnail), which imitates what a re-encoded copy lost
// (Fashion-MNIST at JPEG 30: 0.986-0.995 as they are, 0.999-0.9999 after the
// imitation). It must leave at most kJpegShare of the pair's allowance.
MatchSettings pair_settings(const MatchSettings& settings, PictureSize a, PictureSize b, int t);
inline constexpr double kResampleArea = 0.8;
inline constexpr int kJpegMaxQuality = 90;
inline constexpr double kJpegShare = 0.4;
// The re-encoded comparison is tried only for pairs whose plain correlation
// reaches this (besides the screen's gate). Measured on Fashion-MNIST: at 0.98,
// 9 of 350 copies at JPEG 30 were lost, at 0.97 none; on a tree of its
// pictures half PNG, half JPEG 30-75 the audit took 2.5 s at 0.97 against 3.2 s
// without the floor and 1.9 s without the comparison (docs/lookalikes.md).
inline constexpr double kJpegFloor = 0.97;

// The ways programs reduce a picture, each as the resampled comparison imitates
// it: area averaging (cv::INTER_AREA; cv::INTER_LINEAR at half size), every
// n-th pixel (cv::INTER_NEAREST; Pillow's NEAREST, which takes the pixel under
// each output's centre), linear and cubic interpolation at the output's centre
// without widening (cv::INTER_LINEAR, cv::INTER_CUBIC, cv::INTER_LANCZOS4),
// and the box, triangle and cubic kernels widened by the scale (Pillow's BOX,
// BILINEAR and BICUBIC; its HAMMING and LANCZOS are near the cubic). The
// comparison takes the one whose result correlates best with the smaller
// picture's pixels.
enum class ResampleKernel { area, nearest, nearest_centre, linear, cubic, lanczos, box_wide, triangle_wide, cubic_wide };
inline constexpr int kResampleKernels = 9;

// The larger picture's thumbnail `in` brought to the smaller one's pixel size
// and back: its samples taken back to the larger picture's pixels (at most 32 a
// side), reduced to r.width x r.height by `kernel`, and enlarged to 32x32 by
// linear interpolation (half-pixel centres), as features.cc enlarges a small
// picture. Gray plane alone or all three. A side that is not reduced stays as
// it is. Plain double arithmetic, rounded half up: the same bytes on every
// processor.
void resample_thumbnail(const Thumbnail& in, const MatchSettings::Resample& r, ResampleKernel kernel, Thumbnail& out,
                        bool gray_only = false);
// The thumbnail `in` of a picture of width x height (at most 32 a side: the
// thumbnail gives its pixels back, as in the resampled comparison) with its
// gray plane as the IJG library would store the picture at `quality`: 8x8
// blocks (padded by repeating the last column and row) of the orthonormal DCT
// (T.81's FDCT of the levels less 128), each coefficient rounded to the nearest
// multiple of its step of the IJG luminance table (halves away from zero), and
// back; then enlarged to 32 as features.cc enlarges. The chroma planes are
// kept. No libm call (the cosines come from sin_pi).
void jpeg_thumbnail(const Thumbnail& in, int width, int height, int quality, Thumbnail& out);


// The tone-and-colour fit's gate: the profiles' bound on the blur-matched
// correlation (match_may_join's) must reach kFitGate, held within [fit_floor,
// min_correlation] (min_correlation itself when the fit is off). It keeps the fit to pairs whose low frequencies agree
// closely: on Fashion-MNIST's 6.2 million hash hits a gate at 0.98 passes 1.35
// million pairs to the thumbnails, at 0.99 288,000 (at 0.995, no fit, 44,000),
// and the planted tone and colour copies lose almost nothing from 0.98 to 0.99
// (docs/lookalikes.md).
inline constexpr double kFitGate = 0.99;
// The resampled comparison is tried only for pairs whose blur-matched
// correlation can reach this (the screen's bound, blur_may_reach), so that the
// screen stays exact; reduced copies of Fashion-MNIST pictures reach 0.993 and
// more without it.
inline constexpr double kResampleGate = kFitGate;
// A pair whose two pictures have colour is fitted from a lower floor,
// kColourFitFloor (or fit_floor when lower), which is also its gate, when its
// colours changed as a whole (the colour check's fit turns the chroma by 10
// degrees or more or scales it by 10% or more): a hue or saturation change
// leaves copies whose plain correlation is 0.91-0.98 (photograph tiles turned
// by 60 degrees), and the fit's turn regressor predicts that change pixel by
// pixel (docs/lookalikes.md).
inline constexpr double kColourFitFloor = 0.90;
// A pair fitted only because of that lower floor (its plain correlation under
// fit_floor) must leave at most this share of the allowance (1 -
// min_correlation) unexplained: 0.998 at the default. Measured: hue and
// saturation copies of photograph tiles fit at 0.999 and more; crops of one
// photograph's blurred background, each of about one colour, at 0.995-0.998.
inline constexpr double kColourPathShare = 0.4;
double fit_floor(const MatchSettings& settings, bool colour);
// The gate for a pair in colour fitted only because of the lower floor (`colour`
// true) is that floor; any other pair's is kFitGate, held within [fit_floor,
// min_correlation].
double fit_gate(const MatchSettings& settings, bool colour = false);

// The blur ladder: sigma = 0.25 s thumbnail pixels for s = 0..kBlurSteps-1
// (kBlurSteps is in model/group.h, since a stored link names its step).
double blur_sigma(int step);

// The low DCT coefficients the screen keeps: (u, v) with u, v < 8 and u + v <= 8,
// the DC term left out (42; the set is its own transpose), stored in 44 slots
// (the last two 0) for whole groups of four.
inline constexpr int kScreenCoefficients = 42, kScreenSlots = 44;

// What a thumbnail brings to every comparison, computed once: 128 bytes, one
// aligned pair of cache lines (the screen reads one profile at random per hit).
struct alignas(128) MatchProfile {
  ThumbStats stats{};
  // Spectral moments of the gray thumbnail: mean and variance of lambda (above)
  // weighted by the power spectrum without the DC term.
  float lambda_mean = 0, lambda_var = 0;
  // The screen's coefficients of the centred thumbnail scaled to unit length,
  // x 32767, (u, v) in row order; energy[s] their squared
  // length after blur step s (in units of 1), x 65535, rounded down.
  std::array<int16_t, kScreenSlots> low{};
  std::array<uint16_t, kBlurSteps> energy{};
  bool flat = false;
  bool colour = false;  // the chroma varies (the colour checks' rule)
};
static_assert(sizeof(MatchProfile) == 128);
MatchProfile match_profile(const Thumbnail& thumb);

// The profile of a thumbnail's value plane: each pixel's largest channel (the
// HSV value, from its gray level, Cb and Cr, BT.601, rounded), profiled as
// match_profile profiles a gray plane. A change of hue or saturation on the HSV
// circle leaves every pixel's value as it was, while it can move the gray
// picture's hash and screen key far (photograph tiles turned by 60 degrees:
// 10-14 bits). Its screen coefficients are the third candidate key
// (screen_join.h). Flat (no key) unless the thumbnail has colour.
MatchProfile value_profile(const Thumbnail& thumb);

// The blur steps tried for a pair: `steps[0..count)`, and whether the blur goes
// on a (true: a is the sharper) or on b. Step 0 (no blur) is always tried besides.
struct BlurCandidates {
  bool blur_a = true;
  int count = 0;
  std::array<int, 4> steps{};
};
BlurCandidates blur_candidates(const MatchProfile& a, const MatchProfile& b);

struct Match {
  bool joined = false;
  float correlation = 0;  // blur-matched
  float local = 0;
  float chroma = -1;  // -1: not measured (no colour variation on either side)
  float chroma_local = 0;  // the colour check's largest unexplained share in a 2x2-cell window
  int blur_step = 0;  // the step that gave the correlation (0: none)
  bool blurred_a = true;  // which side the blur went on (when blur_step > 0)
  bool fitted = false;    // the correlation is the tone-and-colour fit's
  bool fitted_a = true;   // a was the fit's source (b fitted from a), else b
  bool resampled = false; // the measures are the resampled comparison's (MatchSettings::Resample)
  int jpeg_quality = 0;   // the re-encoded comparison's quality, when its measures are these (MatchSettings::Jpeg)
};

// `turned_a`: the first thumbnail after the hit's flip/turn t (turn_thumbnail);
// `pa` the profile of a itself (as it was before transform t).
// `a_spectrum`, when given, holds turned_a's DCT (dct32) for comparisons of one
// turned thumbnail with many: filled on first need when empty, reused after.
Match match_thumbnails(const Thumbnail& turned_a, const MatchProfile& pa, int t, const Thumbnail& b, const MatchProfile& pb,
                       const MatchSettings& settings, std::vector<float>* a_spectrum = nullptr);

// The same for a's transform t (turns it first).
Match match_thumbnails(const Thumbnail& a, int t, const Thumbnail& b, const MatchSettings& settings);

// False only when match_thumbnails(transform t of a, b) cannot join them: the
// blur-matched correlation is below min_correlation for certain. Uses the
// profiles alone (about 64 multiplications a step tried).
bool match_may_join(const MatchProfile& a, int t, const MatchProfile& b, const MatchSettings& settings);

}  // namespace tamis
