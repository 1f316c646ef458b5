#include "tamis/match.h"

#include <algorithm>
#include <array>
#include <cmath>
#include <cstring>
#include <vector>

namespace tamis {

double blur_sigma(int step) { return 0.25 * step; }

namespace {

constexpr double kChromaNoise = 1.5;  // levels a cell: the floor under the target's variation
constexpr double kColourless = 2.0;   // chroma standard deviation below which a side has no colour
constexpr double kLowScale = 32767.0;  // MatchProfile::low: unit coefficients x this

// The gains exp(-tau_s lambda_uv) of every blur step, [step][32 u + v].
struct BlurTable {
  alignas(32) std::array<std::array<float, 1024>, kBlurSteps> gain{}, gain2{};  // gains, and squared
  // The screen's coefficients: coefficient i is 32 u + v = index[i] of the full
  // block; transposed[i] is the screen coefficient at (v, u).
  std::array<int, kScreenCoefficients> index{}, transposed{};
  // low_gain[s][i]: the gain of step s for screen coefficient i over 32767^2 (the
  // stored coefficients' scale squared); the rows past the ladder are 0, so that
  // four consecutive steps can always be read. low_gain2: the squared gains, in
  // units of 1. sign[t][i]: the sign flip/turn t gives coefficient i (after its
  // transpose, when t has one). Slots 42 and 43 are 0 throughout.
  alignas(16) std::array<std::array<float, kScreenSlots>, kBlurSteps + 3> low_gain{};
  alignas(16) std::array<std::array<float, kScreenSlots>, kBlurSteps> low_gain2{};
  alignas(16) std::array<std::array<float, kScreenSlots>, kDihedralCount> sign{};
  BlurTable() {
    constexpr double kPi = 3.14159265358979323846;
    for (int s = 0; s < kBlurSteps; ++s) {
      const double sigma = blur_sigma(s), tau = sigma * sigma / 2.0;
      for (int u = 0; u < 32; ++u)
        for (int v = 0; v < 32; ++v) {
          const double su = std::sin(kPi * u / 64.0), sv = std::sin(kPi * v / 64.0);
          const double g = std::exp(-tau * (4.0 * su * su + 4.0 * sv * sv));
          gain[size_t(s)][size_t(32 * u + v)] = static_cast<float>(g);
          gain2[size_t(s)][size_t(32 * u + v)] = static_cast<float>(g * g);
        }
    }
    int n = 0;
    for (int u = 0; u < 8; ++u)
      for (int v = 0; v < 8; ++v)
        if (u + v > 0 && u + v <= 8) index[size_t(n++)] = 32 * u + v;
    for (int i = 0; i < kScreenCoefficients; ++i) {
      const int u = index[size_t(i)] / 32, v = index[size_t(i)] % 32;
      for (int j = 0; j < kScreenCoefficients; ++j)
        if (index[size_t(j)] == 32 * v + u) transposed[size_t(i)] = j;
      for (int s = 0; s < kBlurSteps; ++s)
        low_gain2[size_t(s)][size_t(i)] = gain2[size_t(s)][size_t(index[size_t(i)])];
      for (int s = 0; s < kBlurSteps; ++s)
        low_gain[size_t(s)][size_t(i)] =
            static_cast<float>(double(gain[size_t(s)][size_t(index[size_t(i)])]) / (32767.0 * 32767.0));
      for (int t = 0; t < kDihedralCount; ++t)
        sign[size_t(t)][size_t(i)] = turn_negates(t, u, v) ? -1.0f : 1.0f;
    }
  }
};
const BlurTable& blur_table() {
  static const BlurTable t;
  return t;
}

typedef float Lanes __attribute__((vector_size(16)));  // four floats, one SIMD register
typedef int16_t Shorts __attribute__((vector_size(8)));  // four int16

inline Lanes lanes_at(const float* f) {
  Lanes v;
  std::memcpy(&v, f, sizeof v);
  return v;
}
inline double lane_sum(Lanes v) { return (double(v[0]) + double(v[1])) + (double(v[2]) + double(v[3])); }

// Largest mean square of (za - zb) over 8x8 windows at a step of 4, za and zb the
// two planes standardized (each centred on its mean and divided by its standard
// deviation).
template <typename T, typename U>
double local_residual(const T* a, const U* b) {
  double ma = 0, mb = 0;
  for (size_t i = 0; i < kGrayBytes; ++i) {
    ma += double(a[i]);
    mb += double(b[i]);
  }
  ma /= double(kGrayBytes);
  mb /= double(kGrayBytes);
  double va = 0, vb = 0;
  for (size_t i = 0; i < kGrayBytes; ++i) {
    va += (double(a[i]) - ma) * (double(a[i]) - ma);
    vb += (double(b[i]) - mb) * (double(b[i]) - mb);
  }
  const double ia = 1.0 / std::sqrt(std::max(va / double(kGrayBytes), 1e-12));
  const double ib = 1.0 / std::sqrt(std::max(vb / double(kGrayBytes), 1e-12));
  // Squared residuals summed over 4x4 cells, then windows of 2x2 cells.
  std::array<double, 64> cell{};
  for (int y = 0; y < kThumbSide; ++y)
    for (int x = 0; x < kThumbSide; ++x) {
      const size_t i = size_t(y * kThumbSide + x);
      const double r = (double(a[i]) - ma) * ia - (double(b[i]) - mb) * ib;
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

// Sums over 1,024 values in eight fixed lanes (vectorizable, and the same
// result on any processor).
inline double dot1024(const float* x, const float* y) {
  float acc[8] = {};
  for (int k = 0; k < 1024; k += 8)
    for (int i = 0; i < 8; ++i) acc[i] += x[k + i] * y[k + i];
  return ((double(acc[0]) + acc[1]) + (double(acc[2]) + acc[3])) + ((double(acc[4]) + acc[5]) + (double(acc[6]) + acc[7]));
}
inline double sum1024(const float* x) {
  float acc[8] = {};
  for (int k = 0; k < 1024; k += 8)
    for (int i = 0; i < 8; ++i) acc[i] += x[k + i];
  return ((double(acc[0]) + acc[1]) + (double(acc[2]) + acc[3])) + ((double(acc[4]) + acc[5]) + (double(acc[6]) + acc[7]));
}

}  // namespace

MatchProfile match_profile(const Thumbnail& thumb) {
  MatchProfile p;
  p.stats = thumb_stats(thumb);
  p.flat = thumb_is_flat(p.stats);
  if (p.flat) return p;
  // Spectral moments from pixel differences (exact integers): with reflecting
  // edges, sum lambda |A|^2 is the sum of squared neighbour differences and
  // sum lambda^2 |A|^2 the sum of the squared grid Laplacian.
  const uint8_t* g = thumb.data();
  // The plane with its edges repeated: a difference across an edge is then 0,
  // which is the reflecting edge.
  int32_t q[34][34];
  for (int y = 0; y < 32; ++y) {
    int32_t* row = q[y + 1];
    for (int x = 0; x < 32; ++x) row[x + 1] = g[32 * y + x];
    row[0] = row[1];
    row[33] = row[32];
  }
  std::memcpy(q[0], q[1], sizeof q[0]);
  std::memcpy(q[33], q[32], sizeof q[33]);
  int32_t e1 = 0, e2 = 0;  // at most 2 * 1024 * 255^2 and 1024 * 1020^2, both < 2^31
  for (int y = 1; y <= 32; ++y)
    for (int x = 1; x <= 32; ++x) {
      const int32_t dx = q[y][x + 1] - q[y][x], dy = q[y + 1][x] - q[y][x];
      const int32_t lap = q[y][x - 1] + q[y][x + 1] + q[y - 1][x] + q[y + 1][x] - 4 * q[y][x];
      e1 += dx * dx + dy * dy;
      e2 += lap * lap;
    }
  const double e0 = double(p.stats.sum_sq) - double(p.stats.sum) * double(p.stats.sum) / 1024.0;
  const double mean = double(e1) / e0;
  p.lambda_mean = static_cast<float>(mean);
  p.lambda_var = static_cast<float>(std::max(0.0, double(e2) / e0 - mean * mean));
  double block[64];
  dct_low_block(g, block);
  const double norm = std::sqrt(e0);
  const BlurTable& bt = blur_table();
  std::array<double, kScreenCoefficients> unit{};
  for (size_t i = 0; i < size_t(kScreenCoefficients); ++i) {
    const int k = bt.index[i];
    const double q = double(std::lround(std::clamp(block[8 * (k / 32) + k % 32] / norm, -1.0, 1.0) * kLowScale));
    p.low[i] = static_cast<int16_t>(q);
    unit[i] = q / kLowScale;
  }
  // (float lanes: the rounding is far inside the 2 / 65535 the screen allows for q)
  alignas(16) float sq[kScreenSlots] = {};
  for (size_t i = 0; i < size_t(kScreenCoefficients); ++i) sq[i] = float(unit[i] * unit[i]);
  for (int s = 0; s < kBlurSteps; ++s) {
    const float* g2 = bt.low_gain2[size_t(s)].data();
    Lanes e = {};
    for (size_t i = 0; i < size_t(kScreenSlots); i += 4) e += lanes_at(g2 + i) * lanes_at(sq + i);
    p.energy[size_t(s)] = static_cast<uint16_t>(std::clamp(std::floor(lane_sum(e) * 65535.0), 0.0, 65535.0));
  }
  return p;
}

BlurCandidates blur_candidates(const MatchProfile& a, const MatchProfile& b) {
  BlurCandidates c;
  // A blur by tau lowers the mean of lambda by about 2 tau times its variance
  // (the first term of the cumulant expansion, which underestimates strong blur:
  // hence the two steps above the estimate).
  c.blur_a = a.lambda_mean >= b.lambda_mean;
  const MatchProfile& sharp = c.blur_a ? a : b;
  // sigma^2 = 2 tau = drop / variance; j: the first step with sigma_j >= sigma.
  const double drop = std::abs(double(a.lambda_mean) - double(b.lambda_mean));
  const double var = double(sharp.lambda_var);
  int j = 1;
  while (j < kBlurSteps - 1 && blur_sigma(j) * blur_sigma(j) * var < drop) ++j;
  for (int s = j - 1; s <= j + 2; ++s)
    if (s >= 1 && s < kBlurSteps) c.steps[size_t(c.count++)] = s;
  return c;
}

namespace {

// One pair's screen sums (a after transform t), in units of 1: <a_L, b_L>,
// |a_L|^2, |b_L|^2, and for the pair's blur candidates (consecutive steps from
// c.steps[0]) p[d] = <g x_L, y_L> of step c.steps[0] + d.
struct LowPair {
  double dot = 0, aa = 0, bb = 0;
  std::array<double, 4> p{};
};

LowPair low_pair(const MatchProfile& a, int t, const MatchProfile& b, const BlurCandidates& c) {
  const BlurTable& bt = blur_table();
  // a's coefficients after transform t, signs included; the join asks about one
  // variant many times in a row, so the last one is kept per thread (checked by
  // its content).
  struct Turned {
    int t = -1;
    std::array<int16_t, kScreenSlots> low{};
    alignas(16) float c[kScreenSlots] = {};
    double aa = 0;
  };
  thread_local Turned turned;
  if (turned.t != t || std::memcmp(turned.low.data(), a.low.data(), sizeof a.low) != 0) {
    const float* sign = bt.sign[size_t(t)].data();
    double aa = 0;
    for (size_t i = 0; i < size_t(kScreenCoefficients); ++i) {
      turned.c[i] = sign[i] * float(a.low[(t & 4) ? size_t(bt.transposed[i]) : i]);
      aa += double(turned.c[i]) * turned.c[i];
    }
    turned.aa = aa / (kLowScale * kLowScale);
    turned.low = a.low;
    turned.t = t;
  }
  const size_t first = size_t(c.count > 0 ? c.steps[0] : 0);
  const float* g0 = bt.low_gain[first].data();
  const float* g1 = bt.low_gain[first + 1].data();
  const float* g2 = bt.low_gain[first + 2].data();
  const float* g3 = bt.low_gain[first + 3].data();
  Lanes dot = {}, bb = {}, p0 = {}, p1 = {}, p2 = {}, p3 = {};
  for (size_t i = 0; i < size_t(kScreenSlots); i += 4) {
    Shorts raw;
    std::memcpy(&raw, b.low.data() + i, sizeof raw);
    const Lanes bv = __builtin_convertvector(raw, Lanes);
    const Lanes prod = lanes_at(turned.c + i) * bv;
    dot += prod;
    bb += bv * bv;
    p0 += lanes_at(g0 + i) * prod;
    p1 += lanes_at(g1 + i) * prod;
    p2 += lanes_at(g2 + i) * prod;
    p3 += lanes_at(g3 + i) * prod;
  }
  LowPair lp;
  constexpr double kUnit = 1.0 / (kLowScale * kLowScale);
  lp.dot = lane_sum(dot) * kUnit;
  lp.aa = turned.aa;
  lp.bb = lane_sum(bb) * kUnit;
  lp.p = {lane_sum(p0), lane_sum(p1), lane_sum(p2), lane_sum(p3)};  // low_gain carries 1 / 32767^2
  return lp;
}

// False only when no blur step tried for the pair can bring the correlation to
// thr. A blur step s on the sharper side x, target y (both unit vectors): with
// p = <g x_L, y_L>, q = |g x_L|^2 and the rest of y of squared length
// 1 - |y_L|^2, Cauchy-Schwarz on the rest gives
// rho <= sqrt(max(p, 0)^2 / q + 1 - |y_L|^2).
// The stored coefficients are rounded to 1/32767: each side's vector of them is
// off by at most e = sqrt(42) / 2 / 32767 < 1e-4, so p is off by at most
// e (1 + sqrt(q)), q by 2 e sqrt(q) (and 1/65535 for its own rounding down),
// |y_L|^2 by 2 e; the slack adds what that can move the bound, so that the
// screen never rejects a pair the exact correlation would join.
bool blur_may_reach(const MatchProfile& a, const MatchProfile& b, const BlurCandidates& c, const LowPair& lp,
                    double thr) {
  const double thr2 = thr * thr;
  const MatchProfile& x = c.blur_a ? a : b;
  const double yl = c.blur_a ? lp.bb : lp.aa;
  constexpr double e = 1e-4, dyl = 2 * e + 1e-6;
  // The slack's largest value for q >= 0.02 (below, the pair is kept anyway):
  // 2 sqrt(1 / 0.02) (2e + 1e-6) + (2e sqrt(0.02) + 2 / 65535) / 0.02 < 6e-3.
  constexpr double kMostSlack = 6e-3;
  const double need = thr2 - 1.0 + yl;  // what explained + slack must reach
  if (need <= dyl) return true;
  for (int i = 0; i < c.count; ++i) {
    const int s = c.steps[size_t(i)];
    const double p = lp.p[size_t(i)];
    const double q = double(x.energy[size_t(s)]) / 65535.0;
    if (q < 0.02) return true;  // too little of x left in the block for a sharp bound
    // Most pairs fail even with the largest slack (no square root, no division).
    if ((p > 0 ? std::min(yl * q, p * p) : 0.0) + (kMostSlack + dyl) * q < need * q) continue;
    const double rq = std::sqrt(q);
    const double dp = e * (1.0 + rq) + 1e-6, dq = 2.0 * e * rq + 2.0 / 65535.0;
    const double slack = 2.0 * std::sqrt(yl / q) * dp + yl * dq / q + dyl;
    const double explained = std::min(yl, p > 0 ? p * p / q : 0.0);
    if (explained + slack >= need) return true;
  }
  return false;
}

}  // namespace

bool match_may_join(const MatchProfile& a, int t, const MatchProfile& b, const MatchSettings& settings) {
  const double thr = settings.min_correlation;
  if (thr <= 0 || a.flat || b.flat) return true;
  const BlurCandidates c = blur_candidates(a, b);
  const LowPair lp = low_pair(a, t, b, c);
  // No blur: 1 - rho = |a' - b'|^2 / 2 over all coefficients (unit vectors), and
  // the screen's 42 coefficients bound it from below; the rounding moves the
  // distance by at most sqrt(42) / 32767 < 2.5e-4.
  const double dist = std::max(0.0, lp.aa + lp.bb - 2.0 * lp.dot);
  const double d = std::max(0.0, std::sqrt(dist) - 2.5e-4);
  if (1.0 - d * d / 2.0 >= thr) return true;
  return blur_may_reach(a, b, c, lp, thr);
}

Match match_thumbnails(const Thumbnail& ta, const MatchProfile& pa, int t, const Thumbnail& b, const MatchProfile& pb,
                       const MatchSettings& s, std::vector<float>* a_spectrum) {
  Match m;
  m.correlation = static_cast<float>(thumb_correlation(ta, pa.stats, b, pb.stats));
  if (pa.flat || pb.flat) {  // the flat rule decides
    m.joined = m.correlation >= s.min_correlation;
    return m;
  }
  std::vector<float> blurred;  // the blurred side's pixels, when a blur step matched best
  // The blur steps, unless the low blocks prove that none can reach the
  // threshold (blur_may_reach: a bound, so the result is the same). They are
  // tried even when the thumbnails as they are reach it: the best step also
  // gives the residual that the local check measures.
  const BlurCandidates cand = blur_candidates(pa, pb);
  if (blur_may_reach(pa, pb, cand, low_pair(pa, t, pb, cand), s.min_correlation)) {
    // Correlations from both full DCTs (DC left out).
    std::vector<float> own;
    std::vector<float>& sa = a_spectrum ? *a_spectrum : own;
    if (sa.empty()) {
      sa.resize(1024);
      dct32(ta.data(), sa.data());
    }
    alignas(32) float sb[1024];
    dct32(b.data(), sb);
    // Per coefficient (DC left out): the product, and the blurred side's square.
    const BlurCandidates& c = cand;
    const float* x = c.blur_a ? sa.data() : sb;
    alignas(32) float ab[1024], xx[1024], yy[1024];
    for (size_t k = 0; k < 1024; ++k) {
      ab[k] = sa[k] * sb[k];
      xx[k] = x[k] * x[k];
      yy[k] = (c.blur_a ? sb[k] : sa[k]) * (c.blur_a ? sb[k] : sa[k]);
    }
    ab[0] = xx[0] = yy[0] = 0;
    const double ey = sum1024(yy);
    int best_step = 0;
    double best = m.correlation;
    for (int i = 0; i < c.count; ++i) {
      const int step = c.steps[size_t(i)];
      const double num = dot1024(blur_table().gain[size_t(step)].data(), ab);
      const double eg = dot1024(blur_table().gain2[size_t(step)].data(), xx);
      const double r = num / std::sqrt(eg * ey);
      if (r > best) {
        best = r;
        best_step = step;
      }
    }
    m.correlation = static_cast<float>(best);
    if (best_step > 0 && best >= s.min_correlation) {
      m.blur_step = best_step;
      m.blurred_a = c.blur_a;
      const auto& gain = blur_table().gain[size_t(best_step)];
      alignas(32) float coef[1024];
      coef[0] = 0;
      for (size_t k = 1; k < 1024; ++k) coef[k] = gain[k] * x[k];
      blurred.resize(1024);
      idct32(coef, blurred.data());
    }
  }
  if (m.correlation < s.min_correlation) return m;
  if (m.blur_step == 0)
    m.local = static_cast<float>(local_residual(ta.data(), b.data()));
  else
    m.local = static_cast<float>(m.blurred_a ? local_residual(blurred.data(), b.data())
                                             : local_residual(ta.data(), blurred.data()));
  if (m.local > s.max_local) return m;
  m.chroma = static_cast<float>(chroma_unexplained(ta, b));
  m.joined = m.chroma < 0 || m.chroma <= s.max_chroma;
  return m;
}

Match match_thumbnails(const Thumbnail& a, int t, const Thumbnail& b, const MatchSettings& s) {
  Thumbnail ta;
  turn_thumbnail(a, ta, t);
  return match_thumbnails(ta, match_profile(a), t, b, match_profile(b), s);
}

}  // namespace tamis
