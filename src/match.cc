#include "tamis/match.h"

#include <algorithm>
#include <array>
#include <cmath>

namespace tamis {

namespace {

constexpr double kFlatSd = 2.0;     // grey levels, as features.cc
constexpr double kChromaNoise = 1.5;  // levels a cell: the floor under the target's variation
constexpr double kColourless = 2.0;   // chroma standard deviation below which a side has no colour

double sd_of(const ThumbStats& s) {
  const double m = s.sum / 1024.0;
  return std::sqrt(std::max(0.0, double(s.sum_sq) / 1024.0 - m * m));
}

// Largest mean square of (za - zb) over 8x8 windows at a step of 4.
double local_residual(const uint8_t* a, const ThumbStats& sa, const uint8_t* b, const ThumbStats& sb) {
  const double ma = sa.sum / 1024.0, mb = sb.sum / 1024.0;
  const double ia = 1.0 / sd_of(sa), ib = 1.0 / sd_of(sb);
  // Squared residuals summed over 4x4 cells, then windows of 2x2 cells.
  std::array<double, 64> cell{};
  for (int y = 0; y < kThumbSide; ++y)
    for (int x = 0; x < kThumbSide; ++x) {
      const double r = (a[y * kThumbSide + x] - ma) * ia - (b[y * kThumbSide + x] - mb) * ib;
      cell[static_cast<size_t>((y / 4) * 8 + x / 4)] += r * r;
    }
  double worst = 0;
  for (int cy = 0; cy + 1 < 8; ++cy)
    for (int cx = 0; cx + 1 < 8; ++cx) {
      const size_t k = static_cast<size_t>(cy * 8 + cx);
      worst = std::max(worst, (cell[k] + cell[k + 1] + cell[k + 8] + cell[k + 9]) / 64.0);
    }
  return worst;
}

// Variation of a thumbnail's chroma (sum of squares about the mean, both planes).
double chroma_ss(const uint8_t* c) {
  double total = 0;
  for (int plane = 0; plane < 2; ++plane) {
    double s = 0, s2 = 0;
    for (size_t k = 0; k < kChromaPlane; ++k) {
      const double v = c[plane * kChromaPlane + k];
      s += v;
      s2 += v * v;
    }
    total += s2 - s * s / double(kChromaPlane);
  }
  return total;
}

// Share of the target's chroma variation that no global colour change of the
// source explains: z_t = alpha z_s + beta over the 64 cells, z = Cb + i Cr
// centred on neutral, alpha and beta complex (a hue rotation with a saturation
// scale, and a white-balance shift), fitted by least squares. A general affine
// map of the chroma plane would be too free: with a two-colour backdrop it maps
// the backdrop onto itself and any object colour onto any other. -1 when
// neither side has colour.
double chroma_unexplained(const Thumbnail& a, const Thumbnail& b) {
  const double ssa = chroma_ss(a.data() + kGrayBytes), ssb = chroma_ss(b.data() + kGrayBytes);
  const double floor_ss = 2.0 * 64.0 * kColourless * kColourless;
  if (ssa < floor_ss && ssb < floor_ss) return -1;
  // Fit the less colourful side (target) from the more colourful (source).
  const Thumbnail& src = ssa >= ssb ? a : b;
  const Thumbnail& dst = ssa >= ssb ? b : a;
  const double ss_target = std::min(ssa, ssb);
  const uint8_t* su = src.data() + kGrayBytes;
  const uint8_t* sv = su + kChromaPlane;
  const uint8_t* du = dst.data() + kGrayBytes;
  const uint8_t* dv = du + kChromaPlane;
  // Centred complex values; alpha = <d, s> / <s, s> (complex inner product), beta absorbs the means.
  double msu = 0, msv = 0, mdu = 0, mdv = 0;
  for (size_t k = 0; k < kChromaPlane; ++k) {
    msu += su[k] / 64.0;
    msv += sv[k] / 64.0;
    mdu += du[k] / 64.0;
    mdv += dv[k] / 64.0;
  }
  double ss = 0, re = 0, im = 0;
  for (size_t k = 0; k < kChromaPlane; ++k) {
    const double xu = su[k] - msu, xv = sv[k] - msv, yu = du[k] - mdu, yv = dv[k] - mdv;
    ss += xu * xu + xv * xv;
    re += yu * xu + yv * xv;  // Re(y conj(x))
    im += yv * xu - yu * xv;  // Im(y conj(x))
  }
  const double ar = ss > 0 ? re / ss : 0, ai = ss > 0 ? im / ss : 0;
  double res = 0;
  for (size_t k = 0; k < kChromaPlane; ++k) {
    const double xu = su[k] - msu, xv = sv[k] - msv, yu = du[k] - mdu, yv = dv[k] - mdv;
    const double pu = ar * xu - ai * xv, pv = ar * xv + ai * xu;
    res += (yu - pu) * (yu - pu) + (yv - pv) * (yv - pv);
  }
  return res / (ss_target + 2.0 * 64.0 * kChromaNoise * kChromaNoise);
}

}  // namespace

Match match_thumbnails(const Thumbnail& ta, const ThumbStats& sa, const Thumbnail& b, const ThumbStats& sb,
                       const MatchSettings& s) {
  Match m;
  m.correlation = static_cast<float>(thumb_correlation(ta, sa, b, sb));
  if (m.correlation < s.min_correlation) return m;
  if (sd_of(sa) < kFlatSd || sd_of(sb) < kFlatSd) {  // the flat rule decided
    m.joined = true;
    return m;
  }
  m.local = static_cast<float>(local_residual(ta.data(), sa, b.data(), sb));
  if (m.local > s.max_local) return m;
  m.chroma = static_cast<float>(chroma_unexplained(ta, b));
  m.joined = m.chroma < 0 || m.chroma <= s.max_chroma;
  return m;
}

Match match_thumbnails(const Thumbnail& a, int t, const Thumbnail& b, const MatchSettings& s) {
  Thumbnail ta;
  turn_thumbnail(a, ta, t);
  return match_thumbnails(ta, thumb_stats(a), b, thumb_stats(b), s);
}

}  // namespace tamis
