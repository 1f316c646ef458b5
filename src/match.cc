#include "tamis/match.h"

#include <algorithm>
#include <array>
#include <cmath>

namespace tamis {

namespace {

constexpr double kChromaNoise = 1.5;  // levels a cell: the floor under the target's variation
constexpr double kColourless = 2.0;   // chroma standard deviation below which a side has no colour

// Largest mean square of (za - zb) over 8x8 windows at a step of 4.
double local_residual(const uint8_t* a, const ThumbStats& sa, const uint8_t* b, const ThumbStats& sb) {
  const double ma = sa.sum / 1024.0, mb = sb.sum / 1024.0;
  const double ia = 1.0 / thumb_sd(sa), ib = 1.0 / thumb_sd(sb);
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

// A thumbnail's chroma centred on its means, as complex values z = Cb + i Cr.
struct CentredChroma {
  std::array<double, kChromaPlane> u{}, v{};
  double ss = 0;  // sum of |z|^2: the chroma's variation
};

CentredChroma centred_chroma(const Thumbnail& t) {
  CentredChroma c;
  const uint8_t* u = t.data() + kGrayBytes;
  const uint8_t* v = u + kChromaPlane;
  double mu = 0, mv = 0;
  for (size_t k = 0; k < kChromaPlane; ++k) {
    mu += u[k];
    mv += v[k];
  }
  mu /= double(kChromaPlane);
  mv /= double(kChromaPlane);
  for (size_t k = 0; k < kChromaPlane; ++k) {
    c.u[k] = u[k] - mu;
    c.v[k] = v[k] - mv;
    c.ss += c.u[k] * c.u[k] + c.v[k] * c.v[k];
  }
  return c;
}

// Share of the target's chroma variation that no global colour change of the
// source explains: z_t = alpha z_s + beta over the 64 cells, alpha and beta
// complex (a hue rotation with a saturation scale, and a white-balance shift),
// fitted by least squares. beta absorbs the means; alpha = <t, s> / <s, s>
// (complex inner product), and the residual is |t|^2 - |<t, s>|^2 / |s|^2. A
// general affine map of the chroma plane would be too free: with a two-colour
// backdrop it maps the backdrop onto itself and any object colour onto any
// other. -1 when neither side has colour.
double chroma_unexplained(const Thumbnail& a, const Thumbnail& b) {
  const CentredChroma ca = centred_chroma(a), cb = centred_chroma(b);
  const double floor_ss = 2.0 * double(kChromaPlane) * kColourless * kColourless;
  if (ca.ss < floor_ss && cb.ss < floor_ss) return -1;
  // Fit the less colourful side (target) from the more colourful (source).
  const CentredChroma& src = ca.ss >= cb.ss ? ca : cb;
  const CentredChroma& dst = ca.ss >= cb.ss ? cb : ca;
  double re = 0, im = 0;
  for (size_t k = 0; k < kChromaPlane; ++k) {
    re += dst.u[k] * src.u[k] + dst.v[k] * src.v[k];  // Re(t conj(s))
    im += dst.v[k] * src.u[k] - dst.u[k] * src.v[k];  // Im(t conj(s))
  }
  const double res = std::max(0.0, dst.ss - (src.ss > 0 ? (re * re + im * im) / src.ss : 0.0));
  return res / (dst.ss + 2.0 * double(kChromaPlane) * kChromaNoise * kChromaNoise);
}

}  // namespace

Match match_thumbnails(const Thumbnail& ta, const ThumbStats& sa, const Thumbnail& b, const ThumbStats& sb,
                       const MatchSettings& s) {
  Match m;
  m.correlation = static_cast<float>(thumb_correlation(ta, sa, b, sb));
  if (m.correlation < s.min_correlation) return m;
  if (thumb_is_flat(sa) || thumb_is_flat(sb)) {  // the flat rule decided
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
