// Features: the compact per-image signals the look-alike search works on,
// computed from the decode stage's reduced image.
//
//  - A 64-bit DCT perceptual hash (the DCT method that Zauner 2010 benchmarks):
//    grayscale, area-resized to 32x32, orthonormal 2-D DCT-II, the low 8x8 block
//    (DC included), each bit = coefficient > median of the 64. Bit k (k = 8*row +
//    col of the block) is bit (63 - k) of the code, so the first coefficient is
//    the most significant bit.
//  - The same code for each of the 8 flips/turns of the thumbnail (the dihedral
//    group D4), derived exactly from the one DCT block: a mirror of the image
//    negates the odd-frequency coefficients along that axis, a transpose
//    transposes the block.
//  - The 32x32 grayscale thumbnail itself, kept for the independent second signal
//    that confirms a candidate pair: the Pearson correlation of the two thumbnails'
//    pixels after the matched flip/turn (docs/lookalikes.md for why 32x32).
// Pure functions; thread-safe.
#pragma once

#include <array>
#include <cstdint>

#include <opencv2/core.hpp>

#include "tamis/model/record.h"

namespace tamis {

// The 32x32 gray thumbnail the hash is computed from (8-bit, area-resized from `reduced`).
cv::Mat hash_thumbnail(const cv::Mat& reduced);

// The DCT hash of a 32x32 8-bit gray thumbnail, for transform t.
std::array<uint64_t, kDihedralCount> dct_hashes(const cv::Mat& thumb32);

// All look-alike features of one reduced decode (1, 3 or 4 channels, 8-bit).
Lookalike lookalike_features(const cv::Mat& reduced);

// Quality statistics of a reduced decode (1, 3 or 4 channels, 8-bit): luminance
// mean, spread and histogram entropy, the variance of the Laplacian (after
// resizing the shorter side to 128 px when larger, so images of any size compare),
// and whether a colour image's channels are all equal. `alpha_min` is passed in
// from the full-resolution decode.
ImageStats image_stats(const cv::Mat& reduced, uint8_t alpha_min);

// The variance of the Laplacian of an 8-bit gray image (the `focus` statistic):
// equal, bit for bit, to squaring the standard deviation cv::meanStdDev gives for
// cv::Laplacian(gray, CV_32F), computed without either.
float laplacian_variance(const cv::Mat& gray);

// The low 8x8 block of the orthonormal 2-D DCT-II of a 32x32 gray plane,
// block[8u + v], in double (the block the hash is made from).
void dct_low_block(const uint8_t* gray, double block[64]);

// The full orthonormal 2-D DCT-II of a 32x32 gray plane: out[32 * u + v] for
// vertical frequency u and horizontal frequency v (out[0] is the DC term). In
// float, separable, with the even/odd folding of rows y and 31 - y; every value
// is computed by the same sequence of operations on any processor (the library is
// built without floating-point contraction), so results never depend on the
// instruction set. About 32,000 multiplications.
void dct32(const uint8_t* gray, float* out);
// Its inverse (the orthonormal DCT-III): out[32 * y + x] from coefficients `coef`.
void idct32(const float* coef, float* out);
// The same transforms' coefficients as a dihedral transform t of the plane sees
// them (turn_thumbnail's t): a transpose transposes the block, a mirror negates
// the odd frequencies along its axis. `dst` must not alias `src`.
void turn_coefficients(const float* src, float* dst, int t);
// Whether flip/turn t negates coefficient (u, v) (after its transpose, when t
// has one): a mirror negates the odd frequencies along its axis.
inline bool turn_negates(int t, int u, int v) { return ((t & 2) && (u & 1)) != ((t & 1) && (v & 1)); }

// Applies dihedral transform t to a square row-major gray image of side n.
void apply_dihedral(const uint8_t* src, uint8_t* dst, int n, int t);
// Applies it to a whole thumbnail (the gray plane and both chroma planes).
void turn_thumbnail(const Thumbnail& src, Thumbnail& dst, int t);

// Pearson correlation of a's transform t with b (32x32 thumbnails). Two nearly
// uniform thumbnails (standard deviation below 2 grey levels) correlate 1 when
// their means are within 4 levels, else 0; one uniform and one not: 0.
double thumb_correlation(const Thumbnail& a, int t, const Thumbnail& b);

// The same, in two steps for many comparisons: a thumbnail's sums (unchanged by
// any flip/turn), then the correlation of an already transformed `a` with `b`.
struct ThumbStats {
  uint32_t sum = 0, sum_sq = 0;  // at most 1024 * 255 and 1024 * 255^2 (< 2^27)
};
ThumbStats thumb_stats(const Thumbnail& t);
// A gray thumbnail's standard deviation in grey levels, from its sums.
double thumb_sd(const ThumbStats& s);
double thumb_correlation(const Thumbnail& turned_a, const ThumbStats& sa, const Thumbnail& b, const ThumbStats& sb);

// True when thumb_correlation treats the thumbnail as flat (standard deviation
// below 2 grey levels): its correlations follow the flat rule above.
bool thumb_is_flat(const ThumbStats& s);

}  // namespace tamis
