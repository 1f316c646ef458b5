#include "tamis/relate/match.h"

#include <algorithm>
#include <array>
#include <cmath>
#include <cstring>
#include <map>
#include <vector>

#include "tamis/base/exact_math.h"

namespace tamis {

double blur_sigma(int step) { return 0.25 * step; }

float size_allowance(uint32_t width, uint32_t height, const MatchSettings& settings) {
  const double side = settings.small_side;
  if (width == 0 || height == 0 || side <= 0 || (width >= side && height >= side)) return 1.0f;
  const double share = std::min<double>(width, side) * std::min<double>(height, side) / (side * side);
  return static_cast<float>(share);
}

PictureSize picture_size(uint32_t width, uint32_t height, uint8_t jpeg_quality) {
  return {static_cast<uint16_t>(std::min<uint32_t>(width, 65535)), static_cast<uint16_t>(std::min<uint32_t>(height, 65535)),
          jpeg_quality};
}

PictureSize picture_size(const ProbeInfo& probe) {
  // The imitation is of 8-bit samples in blocks as stored and shown.
  const bool imitable = probe.format == Format::jpeg && probe.orientation <= 1 && probe.bit_depth == 8;
  return picture_size(probe.width, probe.height, imitable ? probe.jpeg_quality : uint8_t{0});
}

MatchSettings pair_settings(const MatchSettings& settings, PictureSize a, PictureSize b, int t) {
  MatchSettings s = settings;
  s.resample = {};
  s.jpeg = {};
  const float allowance_a = size_allowance(a.width, a.height, settings);
  const float allowance_b = size_allowance(b.width, b.height, settings);
  const float share = std::sqrt(allowance_a * allowance_b);
  if (share < 1.0f) s.min_correlation = 1.0 - (1.0 - settings.min_correlation) * static_cast<double>(share);
  // a's size in b's frame: a flip/turn with a transpose (t & 4) swaps its sides.
  if (t & 4) std::swap(a.width, a.height);
  if (a.width == 0 || a.height == 0 || b.width == 0 || b.height == 0) return s;
  // a no JPEG, or one of a higher quality than b's: re-encoding a at b's
  // quality can imitate b (a JPEG re-encoded at its own quality or above
  // changes little).
  if (b.jpeg_quality > 0 && b.jpeg_quality <= kJpegMaxQuality && (a.jpeg_quality == 0 || a.jpeg_quality > b.jpeg_quality) &&
      a.width == b.width && a.height == b.height && b.width <= kThumbSide && b.height <= kThumbSide) {
    s.jpeg.width = b.width;
    s.jpeg.height = b.height;
    s.jpeg.quality = b.jpeg_quality;
    s.jpeg.min_correlation = 1.0 - (1.0 - s.min_correlation) * kJpegShare;
  }
  const bool a_larger = a.width >= b.width && a.height >= b.height;
  const bool b_larger = b.width >= a.width && b.height >= a.height;
  if (a_larger == b_larger) return s;  // the same size, or neither inside the other
  const PictureSize& small = a_larger ? b : a;
  const PictureSize& large = a_larger ? a : b;
  if (std::min(small.width, small.height) >= kThumbSide ||
      double(small.width) * small.height > kResampleArea * double(large.width) * large.height)
    return s;
  s.resample.width = small.width;
  s.resample.height = small.height;
  s.resample.large_width = large.width;
  s.resample.large_height = large.height;
  s.resample.on_a = a_larger;
  const float own = a_larger ? allowance_b : allowance_a;
  s.resample.min_correlation = 1.0 - (1.0 - settings.min_correlation) * static_cast<double>(own);
  return s;
}

namespace {

// OpenCV's cubic (a = -0.75, cv::INTER_CUBIC) and Pillow's (a = -0.5,
// Image.BICUBIC) convolution kernels (Keys 1981), and the triangle.
double cubic_weight(double x, double a) {
  x = x < 0 ? -x : x;
  if (x < 1) return ((a + 2) * x - (a + 3)) * x * x + 1;
  if (x < 2) return ((a * x - 5 * a) * x + 8 * a) * x - 4 * a;
  return 0;
}
// The Lanczos kernel of 4 lobes, sinc(x) sinc(x / 4) (cv::INTER_LANCZOS4's).
double lanczos4_weight(double x) {
  if (x > -1e-9 && x < 1e-9) return 1.0;
  if (x <= -4 || x >= 4) return 0.0;
  constexpr double kPi = 3.14159265358979323846;
  return 4.0 * sin_pi(x) * sin_pi(x / 4.0) / (kPi * kPi * x * x);
}
double triangle_weight(double x) {
  x = x < 0 ? -x : x;
  return x < 1 ? 1 - x : 0;
}

// One side's reduction from `large` samples to `small` (< kThumbSide), as a
// small x large matrix (row-major), by each of the ways programs reduce
// pictures (ResampleKernel).
std::vector<double> reduction(int large, int small, ResampleKernel kernel) {
  std::vector<double> k(size_t(small) * size_t(large), 0.0);
  const double scale = double(large) / small;
  auto at = [&](int j, int x) -> double& { return k[size_t(j) * size_t(large) + size_t(std::clamp(x, 0, large - 1))]; };
  for (int j = 0; j < small; ++j) {
    const double centre = (j + 0.5) * scale;  // in input pixels, edges at integers
    switch (kernel) {
      case ResampleKernel::area: {  // cv::INTER_AREA: the input pixels the output covers, partly covered ones in part
        const double lo = j * scale, hi = (j + 1) * scale;
        for (int x = 0; x < large; ++x) {
          const double overlap = std::min(hi, double(x + 1)) - std::max(lo, double(x));
          if (overlap > 0) at(j, x) += overlap / scale;
        }
        break;
      }
      case ResampleKernel::nearest:  // cv::INTER_NEAREST: the input pixel floor(j scale)
        at(j, static_cast<int>(j * scale)) += 1.0;
        break;
      case ResampleKernel::nearest_centre:  // Pillow's NEAREST: the pixel under the output's centre
        at(j, static_cast<int>(centre)) += 1.0;
        break;
      case ResampleKernel::linear:  // cv::INTER_LINEAR, INTER_CUBIC and INTER_LANCZOS4: taps at the centre, not widened
      case ResampleKernel::cubic:
      case ResampleKernel::lanczos: {
        const double f = centre - 0.5;
        const int x0 = static_cast<int>(std::floor(f));
        if (kernel == ResampleKernel::linear) {
          at(j, x0) += 1.0 - (f - x0);
          at(j, x0 + 1) += f - x0;
        } else if (kernel == ResampleKernel::cubic) {
          for (int x = x0 - 1; x <= x0 + 2; ++x) at(j, x) += cubic_weight(f - x, -0.75);
        } else {
          double sum = 0;
          for (int x = x0 - 3; x <= x0 + 4; ++x) sum += lanczos4_weight(f - x);
          for (int x = x0 - 3; x <= x0 + 4; ++x) at(j, x) += lanczos4_weight(f - x) / sum;
        }
        break;
      }
      case ResampleKernel::box_wide:  // Pillow's BOX, BILINEAR and BICUBIC: the kernel widened by the scale
      case ResampleKernel::triangle_wide:
      case ResampleKernel::cubic_wide: {
        const bool tri = kernel == ResampleKernel::triangle_wide, box = kernel == ResampleKernel::box_wide;
        const double support = (box ? 0.5 : tri ? 1.0 : 2.0) * scale;
        const int first = static_cast<int>(std::floor(centre - support)), last = static_cast<int>(std::floor(centre + support));
        double sum = 0;
        std::vector<std::pair<int, double>> taps;
        for (int x = first; x <= last; ++x) {
          if (x < 0 || x >= large) continue;  // Pillow leaves out what lies outside and renormalizes
          const double d = (x + 0.5 - centre) / scale;
          // Pillow's box takes the pixels whose centres lie in [-1/2, 1/2) of the output's, each whole.
          const double w = box ? (d >= -0.5 && d < 0.5 ? 1.0 : 0.0) : tri ? triangle_weight(d) : cubic_weight(d, -0.5);
          if (w == 0) continue;
          taps.push_back({x, w});
          sum += w;
        }
        for (const auto& [x, w] : taps) at(j, x) += w / sum;
        break;
      }
    }
  }
  return k;
}

// Linear interpolation of `from` samples at the centres of `to` samples over the
// same extent (half-pixel centres, replicated edges).
void linear_taps(int from, int to, int i, int& x0, int& x1, double& w) {
  const double f = (i + 0.5) * from / double(to) - 0.5;
  x0 = static_cast<int>(std::floor(f));
  w = f - x0;
  if (x0 < 0) x0 = 0, w = 0;
  if (x0 >= from - 1) x0 = from - 1, w = 0;
  x1 = std::min(x0 + 1, from - 1);
}

// features.cc's linear enlargement of n samples to 32 (half-pixel centres,
// replicated edges): the dense 32 x n matrix U, row-major.
std::vector<double> enlargement(int n) {
  std::vector<double> u(size_t(kThumbSide) * size_t(n), 0.0);
  for (int i = 0; i < kThumbSide; ++i) {
    int x0, x1;
    double w;
    linear_taps(n, kThumbSide, i, x0, x1, w);
    u[size_t(i) * size_t(n) + size_t(x0)] += 1.0 - w;
    u[size_t(i) * size_t(n) + size_t(x1)] += w;
  }
  return u;
}

// The least-squares inverse (U^T U)^-1 U^T (n x 32, row-major) of the linear
// enlargement U (32 x n) of n < 32 samples to 32, as features.cc's cv::resize
// enlarges a picture under 32 px: it gives the picture's pixels back from its
// thumbnail up to the thumbnail's rounding. The identity for n = 32. Computed
// once a thread for each n (Gauss-Jordan; U^T U is symmetric positive definite,
// no pivoting needed).
const std::vector<double>& enlargement_inverse(int n) {
  thread_local std::array<std::vector<double>, kThumbSide + 1> made;
  std::vector<double>& back = made[size_t(n)];
  if (!back.empty()) return back;
  back.assign(size_t(n) * kThumbSide, 0.0);
  if (n == kThumbSide) {
    for (int x = 0; x < n; ++x) back[size_t(x) * kThumbSide + size_t(x)] = 1.0;
    return back;
  }
  const std::vector<double> u = enlargement(n);  // [32][n]
  // Gauss-Jordan on [U^T U | U^T].
  const size_t cols = size_t(n) + kThumbSide;
  std::vector<double> g(size_t(n) * cols, 0.0);
  for (int row = 0; row < n; ++row) {
    for (int c = 0; c < n; ++c) {
      double v = 0;
      for (int i = 0; i < kThumbSide; ++i) v += u[size_t(i) * size_t(n) + size_t(row)] * u[size_t(i) * size_t(n) + size_t(c)];
      g[size_t(row) * cols + size_t(c)] = v;
    }
    for (int i = 0; i < kThumbSide; ++i) g[size_t(row) * cols + size_t(n) + size_t(i)] = u[size_t(i) * size_t(n) + size_t(row)];
  }
  for (int p = 0; p < n; ++p) {
    const double d = g[size_t(p) * cols + size_t(p)];
    for (size_t c = 0; c < cols; ++c) g[size_t(p) * cols + c] /= d;
    for (int row = 0; row < n; ++row) {
      if (row == p) continue;
      const double f = g[size_t(row) * cols + size_t(p)];
      if (f == 0) continue;
      for (size_t c = 0; c < cols; ++c) g[size_t(row) * cols + c] -= f * g[size_t(p) * cols + c];
    }
  }
  for (int x = 0; x < n; ++x)
    for (int i = 0; i < kThumbSide; ++i) back[size_t(x) * kThumbSide + size_t(i)] = g[size_t(x) * cols + size_t(n) + size_t(i)];
  return back;
}

// Sparse rows of a resampling matrix: output j takes weight[k] of input
// index[k] for k in [start[j], start[j + 1]).
struct Taps {
  std::vector<int> start, index;
  std::vector<double> weight;
};
Taps sparse(const std::vector<double>& dense, int outputs, int inputs) {
  Taps t;
  for (int j = 0; j < outputs; ++j) {
    t.start.push_back(int(t.index.size()));
    for (int x = 0; x < inputs; ++x)
      if (dense[size_t(j) * size_t(inputs) + size_t(x)] != 0) {
        t.index.push_back(x);
        t.weight.push_back(dense[size_t(j) * size_t(inputs) + size_t(x)]);
      }
  }
  t.start.push_back(int(t.index.size()));
  return t;
}

// The enlargement's taps, made once a thread for each n.
const Taps& enlargement_taps(int n) {
  thread_local std::array<Taps, kThumbSide + 1> made;
  Taps& t = made[size_t(n)];
  if (t.start.empty()) t = sparse(enlargement(n), kThumbSide, n);
  return t;
}

// One side's way through the resampled comparison: the thumbnail's 32 samples
// go back to the picture's `pixels` (min(large, 32): the inverse of features.cc's
// enlargement for a picture under 32 px on this side, enlargement_inverse;
// else the thumbnail's pixels stand for the picture's), are reduced to `small`
// by the kernel (`down`), and enlarged to 32 (`up`: linear interpolation with
// half-pixel centres and replicated edges, as features.cc's cv::resize enlarges
// a small picture). A side that is not reduced has pixels = small = 32 and both
// the identity.
struct SideResample {
  int pixels = kThumbSide, small = kThumbSide;
  Taps down, up;
};

SideResample make_side_resample(int large, int small, ResampleKernel kernel) {
  SideResample r;
  std::vector<double> identity(size_t(kThumbSide) * kThumbSide, 0.0);
  for (int i = 0; i < kThumbSide; ++i) identity[size_t(i * kThumbSide + i)] = 1.0;
  if (small <= 0 || small >= kThumbSide || small >= large) {
    r.down = r.up = sparse(identity, kThumbSide, kThumbSide);
    return r;
  }
  r.pixels = std::min(large, kThumbSide);
  r.small = small;
  r.down = sparse(reduction(r.pixels, small, kernel), small, r.pixels);
  r.up = enlargement_taps(small);
  return r;
}

// The same, made once a thread for each (pixels, reduced size, kernel).
const SideResample& side_resample(int large, int small, ResampleKernel kernel) {
  thread_local std::map<uint32_t, SideResample> made;
  const bool reduced = small > 0 && small < kThumbSide && small < large;
  const uint32_t key = !reduced ? 0u
                                : (uint32_t(std::min(large, kThumbSide)) << 16) | (uint32_t(small) << 8) | uint32_t(kernel);
  auto it = made.find(key);
  if (it == made.end()) it = made.emplace(key, make_side_resample(large, small, kernel)).first;
  return it->second;
}

// A plane's picture pixels from its thumbnail: by . in . bx^T (py x px values),
// b the enlargement's inverse of each side (the identity at 32). Each output
// sums its terms in the same order whatever the loops' order (the inner loops
// run over outputs, which the compiler may do several at a time).
void picture_plane(const uint8_t* in, int px, int py, double* out) {
  const size_t nx = size_t(px), ny = size_t(py), side = kThumbSide;
  if (px == kThumbSide && py == kThumbSide) {
    for (size_t i = 0; i < kGrayBytes; ++i) out[i] = in[i];
    return;
  }
  const std::vector<double>& bx = enlargement_inverse(px);  // [j][c]
  const std::vector<double>& by = enlargement_inverse(py);  // [i][y]
  double bxt[1024];  // bx transposed: [c][j]
  for (size_t j = 0; j < nx; ++j)
    for (size_t c = 0; c < side; ++c) bxt[c * nx + j] = bx[j * side + c];
  double rows[1024];  // [y][j]
  for (size_t y = 0; y < side; ++y) {
    double* r = rows + y * nx;
    for (size_t j = 0; j < nx; ++j) r[j] = 0;
    for (size_t c = 0; c < side; ++c) {
      const double v = in[y * side + c];
      const double* w = bxt + c * nx;
      for (size_t j = 0; j < nx; ++j) r[j] += w[j] * v;
    }
  }
  for (size_t i = 0; i < ny; ++i) {
    double* o = out + i * nx;
    for (size_t j = 0; j < nx; ++j) o[j] = 0;
    for (size_t y = 0; y < side; ++y) {
      const double w = by[i * side + y];
      const double* r = rows + y * nx;
      for (size_t j = 0; j < nx; ++j) o[j] += w * r[j];
    }
  }
}

// Values (rows of in_w, row-major) through the taps of each side: tx along a
// row, ty down a column; each result rounded half up and held to 0-255 (as a file holds
// pixels) when `round`.
void apply_taps(const double* in, int in_w, const Taps& tx, const Taps& ty, bool round, double* out) {
  const size_t out_w = tx.start.size() - 1, out_h = ty.start.size() - 1;
  double rows[1024];  // [input row][output column], for the input rows ty reads
  size_t in_rows = 0;
  for (int idx : ty.index) in_rows = std::max(in_rows, size_t(idx) + 1);
  for (size_t y = 0; y < in_rows; ++y)
    for (size_t j = 0; j < out_w; ++j) {
      double v = 0;
      for (int k = tx.start[j]; k < tx.start[j + 1]; ++k) v += tx.weight[size_t(k)] * in[y * size_t(in_w) + size_t(tx.index[size_t(k)])];
      rows[y * out_w + j] = v;
    }
  for (size_t i = 0; i < out_h; ++i)
    for (size_t j = 0; j < out_w; ++j) {
      double v = 0;
      for (int k = ty.start[i]; k < ty.start[i + 1]; ++k) v += ty.weight[size_t(k)] * rows[size_t(ty.index[size_t(k)]) * out_w + j];
      out[i * out_w + j] = round ? std::clamp(static_cast<int>(std::floor(v + 0.5)), 0, 255) : v;
    }
}

// The Pearson correlation of n values (0 when either is constant).
double pearson(const double* x, const double* y, size_t n) {
  double mx = 0, my = 0;
  for (size_t i = 0; i < n; ++i) mx += x[i], my += y[i];
  mx /= double(n);
  my /= double(n);
  double xy = 0, xx = 0, yy = 0;
  for (size_t i = 0; i < n; ++i) {
    xy += (x[i] - mx) * (y[i] - my);
    xx += (x[i] - mx) * (x[i] - mx);
    yy += (y[i] - my) * (y[i] - my);
  }
  return xx > 0 && yy > 0 ? xy / std::sqrt(xx * yy) : 0.0;
}

}  // namespace

namespace {

// The way of reducing the resampled comparison uses for a pair: the one whose
// reduction of the larger picture's gray pixels correlates best (the first of
// equals) with the smaller picture's pixels, as its thumbnail gives them back,
// at the smaller picture's size.
ResampleKernel choose_kernel(const double* pixels, const Thumbnail& small, const MatchSettings::Resample& r) {
  // The smaller picture's pixels (its thumbnail's gray plane through the
  // inverse of its enlargement), then each kernel's reduction of the larger
  // one's pixels, compared at the smaller size.
  const SideResample& ax = side_resample(r.large_width, r.width, ResampleKernel::area);
  const SideResample& ay = side_resample(r.large_height, r.height, ResampleKernel::area);
  double want[1024], got[1024];
  picture_plane(small.data(), ax.small, ay.small, want);
  ResampleKernel best_kernel = ResampleKernel::area;
  double best = -2;
  for (int k = 0; k < kResampleKernels; ++k) {
    const SideResample& sx = side_resample(r.large_width, r.width, ResampleKernel(k));
    const SideResample& sy = side_resample(r.large_height, r.height, ResampleKernel(k));
    apply_taps(pixels, sx.pixels, sx.down, sy.down, true, got);
    const double c = pearson(got, want, size_t(sx.small) * size_t(sy.small));
    if (c > best) best = c, best_kernel = ResampleKernel(k);
  }
  return best_kernel;
}

// resample_thumbnail, with the gray plane's pixels given when known.
void resample_planes(const Thumbnail& in, const double* gray_pixels, const MatchSettings::Resample& r, ResampleKernel kernel,
                     Thumbnail& out, bool gray_only) {
  const SideResample& sx = side_resample(r.large_width, r.width, kernel);
  const SideResample& sy = side_resample(r.large_height, r.height, kernel);
  double pixels[1024], small[1024], big[1024];
  for (size_t plane = 0; plane < (gray_only ? 1u : 3u); ++plane) {
    const uint8_t* src = in.data() + plane * kGrayBytes;
    uint8_t* dst = out.data() + plane * kGrayBytes;
    // A constant plane (a gray picture's chroma) stays as it is: every step's
    // weights sum to 1.
    if (std::all_of(src, src + kGrayBytes, [&](uint8_t v) { return v == src[0]; })) {
      std::fill(dst, dst + kGrayBytes, src[0]);
      continue;
    }
    if (plane == 0 && gray_pixels) std::copy(gray_pixels, gray_pixels + sx.pixels * sy.pixels, pixels);
    else picture_plane(src, sx.pixels, sy.pixels, pixels);
    apply_taps(pixels, sx.pixels, sx.down, sy.down, true, small);
    apply_taps(small, sx.small, sx.up, sy.up, true, big);
    for (size_t i = 0; i < kGrayBytes; ++i) dst[i] = static_cast<uint8_t>(big[i]);
  }
}

}  // namespace

void resample_thumbnail(const Thumbnail& in, const MatchSettings::Resample& r, ResampleKernel kernel, Thumbnail& out,
                        bool gray_only) {
  resample_planes(in, nullptr, r, kernel, out, gray_only);
}

namespace {

// The orthonormal 8-point DCT-II basis, cos((2x + 1) u pi / 16) C(u) / 2, from
// sin_pi (no libm call).
struct Dct8 {
  double c[8][8];  // [u][x]
  Dct8() {
    for (int u = 0; u < 8; ++u)
      for (int x = 0; x < 8; ++x) c[u][x] = (u == 0 ? 0.35355339059327373 : 0.5) * sin_pi((2 * x + 1) * u / 16.0 + 0.5);
  }
};
const Dct8& dct8() {
  static const Dct8 d;
  return d;
}

}  // namespace

void jpeg_thumbnail(const Thumbnail& in, int width, int height, int quality, Thumbnail& out) {
  out = in;
  const int px = std::min(width, kThumbSide), py = std::min(height, kThumbSide);
  if (px <= 0 || py <= 0) return;
  double pixels[1024];
  picture_plane(in.data(), px, py, pixels);
  // The picture as its file held it (whole levels), padded to whole blocks by
  // repeating its last column and row, as the IJG library pads.
  const int bw = (px + 7) / 8 * 8, bh = (py + 7) / 8 * 8;
  std::vector<double> img(size_t(bw) * size_t(bh));
  for (int y = 0; y < bh; ++y)
    for (int x = 0; x < bw; ++x)
      img[size_t(y * bw + x)] = std::clamp(std::floor(pixels[std::min(y, py - 1) * px + std::min(x, px - 1)] + 0.5), 0.0, 255.0) - 128.0;
  const Dct8& d = dct8();
  int step[64];
  for (int k = 0; k < 64; ++k) step[k] = ijg_luma_step(quality, k);
  double ct[8][8];  // the basis transposed: [x][u]
  for (int u = 0; u < 8; ++u)
    for (int x = 0; x < 8; ++x) ct[x][u] = d.c[u][x];
  for (int by = 0; by < bh; by += 8)
    for (int bx = 0; bx < bw; bx += 8) {
      double blk[8][8];
      bool constant = true;
      for (int y = 0; y < 8; ++y)
        for (int x = 0; x < 8; ++x) {
          blk[y][x] = img[size_t((by + y) * bw + bx + x)];
          constant = constant && blk[y][x] == blk[0][0];
        }
      // Quantized as the IJG library does: the nearest step, halves away from zero.
      auto quantize = [&](double coef, int k) {
        const double q = coef / step[k];
        return (q < 0 ? -std::floor(-q + 0.5) : std::floor(q + 0.5)) * step[k];
      };
      if (constant) {  // only the DC term, 8 times the level: exact without the cosines
        const double level = quantize(8.0 * blk[0][0], 0) / 8.0;
        for (int y = 0; y < 8; ++y)
          for (int x = 0; x < 8; ++x) img[size_t((by + y) * bw + bx + x)] = level;
        continue;
      }
      // Each pass: out[r][u] = sum over x of in[r][x] c[u][x], the sum in x order,
      // outputs in the inner loop; the second pass works on the transpose.
      auto pass = [&](const double (&in)[8][8], double (&out)[8][8], const double (&m)[8][8]) {
        for (int r = 0; r < 8; ++r) {
          double row[8] = {0, 0, 0, 0, 0, 0, 0, 0};
          for (int x = 0; x < 8; ++x)
            for (int u = 0; u < 8; ++u) row[u] += in[r][x] * m[x][u];
          for (int u = 0; u < 8; ++u) out[u][r] = row[u];
        }
      };
      double t1[8][8], f[8][8], t2[8][8], back[8][8];
      pass(blk, t1, ct);    // t1[u][y] = sum_x blk[y][x] c[u][x]: each row's transform
      pass(t1, f, ct);      // f[v][u] = sum_y t1[u][y] c[v][y]: v the vertical frequency
      for (int v = 0; v < 8; ++v)
        for (int u = 0; u < 8; ++u) t2[v][u] = quantize(f[v][u], v * 8 + u);
      pass(t2, t1, d.c);    // t1[x][v] = sum_u t2[v][u] c[u][x]
      pass(t1, back, d.c);  // back[y][x] = sum_v t1[x][v] c[v][y]
      for (int y = 0; y < 8; ++y)
        for (int x = 0; x < 8; ++x) img[size_t((by + y) * bw + bx + x)] = back[y][x];
    }
  double small[1024], big[1024];
  for (int y = 0; y < py; ++y)
    for (int x = 0; x < px; ++x)
      small[y * px + x] = std::clamp(std::floor(img[size_t(y * bw + x)] + 128.0 + 0.5), 0.0, 255.0);
  // Enlarged to 32 as features.cc enlarges a picture under 32 px.
  apply_taps(small, px, enlargement_taps(px), enlargement_taps(py), true, big);
  for (size_t i = 0; i < kGrayBytes; ++i) out[i] = static_cast<uint8_t>(big[i]);
}

// The resampled comparison's thumbnail of the larger picture: the kernel
// chosen, then all three planes (the gray plane's pixels computed once).
void resampled_for_pair(const Thumbnail& large, const Thumbnail& small, const MatchSettings::Resample& r, Thumbnail& out) {
  const SideResample& ax = side_resample(r.large_width, r.width, ResampleKernel::area);
  const SideResample& ay = side_resample(r.large_height, r.height, ResampleKernel::area);
  double pixels[1024];
  picture_plane(large.data(), ax.pixels, ay.pixels, pixels);
  resample_planes(large, pixels, r, choose_kernel(pixels, small, r), out, false);
}

namespace {

// The colour checks judge chroma in 8x8 cells of 4x4 thumbnail pixels (their
// limits were measured at that size; the thumbnail's chroma is 32x32 since the
// sixteenth session, for the tone-and-colour fit).
constexpr int kCellSide = 8;
constexpr size_t kCells = 64;
constexpr double kChromaNoise = 1.5;  // levels a cell: the floor under the target's variation
constexpr double kChromaFloorSs = 2.0 * double(kCells) * kChromaNoise * kChromaNoise;  // that floor over the 64 cells (Cb and Cr)
constexpr double kColourless = 2.0;  // chroma standard deviation below which a side has no colour
constexpr double kMaxCast = 0.15;  // largest |gamma| of chroma_unexplained's luma term
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
    for (int s = 0; s < kBlurSteps; ++s) {
      const double sigma = blur_sigma(s), tau = sigma * sigma / 2.0;
      for (int u = 0; u < 32; ++u)
        for (int v = 0; v < 32; ++v) {
          const double su = sin_pi(u / 64.0), sv = sin_pi(v / 64.0);
          const double g = exp_plain(-tau * (4.0 * su * su + 4.0 * sv * sv));
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

// A thumbnail's Cb and Cr averaged over the 8x8 cells (exact: sums of 16 bytes
// over 16).
struct ChromaCells {
  std::array<double, kCells> u{}, v{};
};
ChromaCells chroma_cells(const Thumbnail& t) {
  ChromaCells cells;
  for (int p = 0; p < 2; ++p) {
    const uint8_t* plane = t.data() + kGrayBytes + size_t(p) * kChromaPlane;
    double* out = p == 0 ? cells.u.data() : cells.v.data();
    for (int cr = 0; cr < kCellSide; ++cr) {
      // The cell row's four pixel rows summed column by column (vectorizable),
      // then four columns a cell.
      uint16_t col[kThumbSide];
      const uint8_t* r0 = plane + 4 * cr * kThumbSide;
      for (int x = 0; x < kThumbSide; ++x)
        col[x] = static_cast<uint16_t>(r0[x] + r0[x + kThumbSide] + r0[x + 2 * kThumbSide] + r0[x + 3 * kThumbSide]);
      for (int c = 0; c < kCellSide; ++c)
        out[cr * kCellSide + c] = double(col[4 * c] + col[4 * c + 1] + col[4 * c + 2] + col[4 * c + 3]) / 16.0;
    }
  }
  return cells;
}

// A thumbnail's cell chroma centred on its means, as complex values z = Cb + i Cr.
struct CentredChroma {
  std::array<double, kCells> u{}, v{};
  double ss = 0;  // sum of |z|^2: the chroma's variation
};

CentredChroma centred_chroma(const ChromaCells& cells) {
  CentredChroma c;
  double mu = 0, mv = 0;
  for (size_t k = 0; k < kCells; ++k) {
    mu += cells.u[k];
    mv += cells.v[k];
  }
  mu /= double(kCells);
  mv /= double(kCells);
  for (size_t k = 0; k < kCells; ++k) {
    c.u[k] = cells.u[k] - mu;
    c.v[k] = cells.v[k] - mv;
    c.ss += c.u[k] * c.u[k] + c.v[k] * c.v[k];
  }
  return c;
}

// The 8x8 means of a thumbnail's gray plane (the chroma's cells).
std::array<double, kCells> luma_cells(const Thumbnail& t) {
  std::array<double, kCells> y{};
  for (int r = 0; r < kThumbSide; ++r)
    for (int c = 0; c < kThumbSide; ++c) y[size_t((r / 4) * kCellSide + c / 4)] += t[size_t(r * kThumbSide + c)];
  for (double& v : y) v /= 16.0;
  return y;
}

// The same, centred.
std::array<double, kCells> centred_luma_cells(const Thumbnail& t) {
  std::array<double, kCells> y = luma_cells(t);
  double m = 0;
  for (double v : y) m += v;
  m /= double(kCells);
  for (double& v : y) v -= m;
  return y;
}

// Share of the target's chroma variation that no global colour change of the
// source explains: z_t = alpha z_s + gamma y_s + beta over the 64 cells, with
// y_s the source's luma cells and alpha, gamma, beta complex (a hue rotation
// with a saturation scale; a colour cast that grows with brightness, which is
// what gains on the red and blue channels, a white-balance change, leave in
// YCbCr; and a constant shift), fitted by least squares. beta absorbs the
// means. A general affine map of the chroma plane would be too free: with a
// two-colour backdrop it maps the backdrop onto itself and any object colour
// onto any other. -1 when neither side has colour.
struct ChromaFit {
  double share = -1;  // -1: neither side has colour
  double alpha_re = 0, alpha_im = 0;  // the fitted hue rotation and saturation scale
  bool a_src = true;  // a was the source (the more colourful side)
  double local = 0;   // the largest share of a 2x2-cell window's chroma that the fit leaves unexplained
};

ChromaFit chroma_unexplained(const Thumbnail& a, const Thumbnail& b, const ChromaCells& cells_a, const ChromaCells& cells_b) {
  ChromaFit fit;
  const CentredChroma ca = centred_chroma(cells_a), cb = centred_chroma(cells_b);
  const double floor_ss = 2.0 * double(kCells) * kColourless * kColourless;
  if (ca.ss < floor_ss && cb.ss < floor_ss) return fit;
  // Fit the less colourful side (target) from the more colourful (source).
  const bool a_src = ca.ss >= cb.ss;
  const CentredChroma& src = a_src ? ca : cb;
  const CentredChroma& dst = a_src ? cb : ca;
  const std::array<double, kCells> y = centred_luma_cells(a_src ? a : b);
  // Normal equations with complex unknowns (alpha, gamma); <p, q> = sum conj(p) q.
  double ss_re = src.ss, yy = 0;
  double sy_re = 0, sy_im = 0;  // <s, y>
  double st_re = 0, st_im = 0;  // <s, t>
  double yt_re = 0, yt_im = 0;  // <y, t>
  for (size_t k = 0; k < kCells; ++k) {
    yy += y[k] * y[k];
    sy_re += src.u[k] * y[k];
    sy_im -= src.v[k] * y[k];
    st_re += src.u[k] * dst.u[k] + src.v[k] * dst.v[k];
    st_im += src.u[k] * dst.v[k] - src.v[k] * dst.u[k];
    yt_re += y[k] * dst.u[k];
    yt_im += y[k] * dst.v[k];
  }
  // [ss  sy; conj(sy)  yy] [alpha; gamma] = [st; yt]. The cast a change of white
  // balance leaves is small (|gamma| about 0.1 for gains of 15% on red and blue);
  // a larger gamma would let an object's small difference in luma paint it any
  // colour, so gamma is held within kMaxCast (on the boundary in the direction of
  // the free fit, alpha refitted: a feasible fit, so the residual is an upper bound
  // of the constrained least squares).
  double ga_re = 0, ga_im = 0;
  const double det = ss_re * yy - (sy_re * sy_re + sy_im * sy_im);
  if (ss_re > 0 && yy > 0 && det > 1e-9 * ss_re * yy) {
    ga_re = (ss_re * yt_re - (sy_re * st_re + sy_im * st_im)) / det;
    ga_im = (ss_re * yt_im - (sy_re * st_im - sy_im * st_re)) / det;
    const double g = std::sqrt(ga_re * ga_re + ga_im * ga_im);
    if (g > kMaxCast) {
      ga_re *= kMaxCast / g;
      ga_im *= kMaxCast / g;
    }
  }
  // t' = t - gamma y; alpha = <s, t'> / <s, s>; residual |t'|^2 - |<s, t'>|^2 / <s, s>.
  double tt = 0, p_re = st_re, p_im = st_im;
  for (size_t k = 0; k < kCells; ++k) {
    const double u = dst.u[k] - ga_re * y[k], v = dst.v[k] - ga_im * y[k];
    tt += u * u + v * v;
  }
  // <s, gamma y> = gamma <s, y> with <s, y> = sy.
  p_re -= ga_re * sy_re - ga_im * sy_im;
  p_im -= ga_re * sy_im + ga_im * sy_re;
  const double explained = dst.ss - tt + (ss_re > 0 ? (p_re * p_re + p_im * p_im) / ss_re : 0.0);
  const double res = std::max(0.0, dst.ss - explained);
  fit.share = res / (dst.ss + kChromaFloorSs);
  fit.a_src = a_src;
  if (ss_re > 0) {
    fit.alpha_re = p_re / ss_re;
    fit.alpha_im = p_im / ss_re;
  }
  // Local: per 2x2-cell window, the residual's energy against the chroma both
  // sides have there (the target's and the fitted source's) and a floor. A
  // global change spreads its residual; an object added, removed or repainted
  // in one place concentrates it where the object is (0 to about 2: opposite
  // colours).
  std::array<double, kCells> res_k{}, both_k{};
  for (size_t k = 0; k < kCells; ++k) {
    const double fu = fit.alpha_re * src.u[k] - fit.alpha_im * src.v[k] + ga_re * y[k];
    const double fv = fit.alpha_re * src.v[k] + fit.alpha_im * src.u[k] + ga_im * y[k];
    const double ru = dst.u[k] - fu, rv = dst.v[k] - fv;
    res_k[k] = ru * ru + rv * rv;
    both_k[k] = dst.u[k] * dst.u[k] + dst.v[k] * dst.v[k] + fu * fu + fv * fv;
  }
  // The floor: the chroma an average window has on both sides, and the noise
  // floor of four cells. (Without the average, a copy's small residual in a
  // window of little colour, next to clipped highlights, reached 1.08.)
  double mean_window = 0;
  for (double v : both_k) mean_window += v;
  mean_window *= 4.0 / double(kCells);
  const double window_floor = mean_window + 4.0 * 2.0 * kChromaNoise * kChromaNoise;
  for (int r = 0; r + 1 < kCellSide; ++r)
    for (int c = 0; c + 1 < kCellSide; ++c) {
      double rs = 0, bs = 0;
      for (int dr = 0; dr < 2; ++dr)
        for (int dc = 0; dc < 2; ++dc) {
          rs += res_k[size_t((r + dr) * kCellSide + c + dc)];
          bs += both_k[size_t((r + dr) * kCellSide + c + dc)];
        }
      fit.local = std::max(fit.local, rs / (bs + window_floor));
    }
  return fit;
}

// A colour on the HSV circle: its hue (0 <= h < 6, in sextants), its chroma
// c = largest - smallest channel, and its smallest channel m (from 0..255, held).
struct Hsv {
  double h = 0, c = 0, m = 0;
};
Hsv to_hsv(double r, double g, double b) {
  r = std::clamp(r, 0.0, 255.0);
  g = std::clamp(g, 0.0, 255.0);
  b = std::clamp(b, 0.0, 255.0);
  const double v = std::max({r, g, b}), m = std::min({r, g, b}), c = v - m;
  if (c <= 1e-9) return {0.0, 0.0, m};
  double h = v == r ? (g - b) / c : v == g ? (b - r) / c + 2.0 : (r - g) / c + 4.0;  // -1 <= h < 5
  if (h < 0) h += 6.0;
  return {h, c, m};
}
// The colour of hue h + sextants (any real), chroma c and smallest channel m.
// (floor, not fmod: the same bits on every processor, and cheaper.)
void from_hsv(const Hsv& p, double sextants, double& r, double& g, double& b) {
  if (p.c <= 1e-9) {
    r = g = b = p.m;
    return;
  }
  double h = p.h + sextants;
  h -= 6.0 * std::floor(h / 6.0);
  if (h >= 6.0) h = 0.0;
  const double half = h - 2.0 * std::floor(h / 2.0);  // h mod 2
  const double x = p.c * (1.0 - std::fabs(half - 1.0));
  const int sector = std::min(5, std::max(0, static_cast<int>(h)));
  const double rr[6] = {p.c, x, 0, 0, x, p.c}, gg[6] = {x, p.c, p.c, x, 0, 0}, bb[6] = {0, 0, x, p.c, p.c, x};
  r = rr[sector] + p.m;
  g = gg[sector] + p.m;
  b = bb[sector] + p.m;
}

// A colour turned by `degrees` around the HSV hue circle (value and saturation
// kept), the way image editors and augmentation libraries turn hue.
void hsv_turn(double& r, double& g, double& b, double degrees) {
  from_hsv(to_hsv(r, g, b), degrees / 60.0, r, g, b);
}

// A colour turned by `degrees` on the HSV circle and its saturation scaled by
// `scale` (value kept; the channels below the largest move away from or towards
// it, held within 0..255).
void hsv_change(double& r, double& g, double& b, double degrees, double scale) {
  hsv_turn(r, g, b, degrees);
  const double v = std::max({r, g, b});
  r = std::clamp(v - scale * (v - r), 0.0, 255.0);
  g = std::clamp(v - scale * (v - g), 0.0, 255.0);
  b = std::clamp(v - scale * (v - b), 0.0, 255.0);
}

// Whether a pair whose chroma differs by a turn (arg alpha of the colour check's
// fit) is a hue turn of the whole picture. Editors and augmentation libraries
// turn hue on the HSV circle, about neutral gray: every colour turns, a weakly
// coloured backdrop included, and a constant shift of the chroma is not part of
// it. The colour check's fit allows that shift (for a tint) and a luma term (for
// white balance), and with a weakly coloured backdrop they absorb the backdrop's
// mismatch, so an object repainted another colour on an unchanged backdrop passes
// it as a "hue rotation". Here each 8x8 cell's colour (its mean gray level, Cb,
// Cr) of the more colourful side is turned on the HSV circle, the angle searched
// over the whole circle (5 degrees, then 1 degree around the best), scaled by one
// saturation factor, and compared with the other side's chroma about neutral; the
// share of that chroma the turn leaves unexplained must be at most kHueResidual.
// On the planted sets (bench/lookalike_truth, docs/lookalikes.md): hue-turned
// copies (30 and 60 degrees, as they are and re-encoded at JPEG 75) leave at most
// 0.015; pairs of rendered scenes whose chroma differs by a turn, 0.11-0.92. The
// limit sits between, about 3x from each.
constexpr double kTanHueMinTurn = 0.36397023426620234;  // tan(20 degrees): smaller turns of arg alpha are not checked
constexpr double kHueResidual = 0.05;  // largest unexplained share of the target's chroma
// The HSV turn of src's cells (their mean gray level, Cb, Cr, to RGB) that best
// explains dst's cell chroma about neutral, with one saturation factor: the
// angle (the whole circle in steps of 5 degrees, then 1 degree around the best),
// the chroma it leaves unexplained and dst's chroma about neutral.
struct HueTurn {
  double degrees = 0, unexplained = 0, total = 0;
  double scale = 0;  // the saturation factor at that angle
};
// `around` (a multiple of 5 degrees) and `reach`: the coarse search covers
// around - reach .. around + reach (the whole circle by default).
HueTurn best_hue_turn(const Thumbnail& src, const ChromaCells& sc, const ChromaCells& tc, int around = 0, int reach = 180) {
  const std::array<double, kCells> ys = luma_cells(src);
  HueTurn h;
  for (size_t k = 0; k < kCells; ++k) {
    const double x = tc.u[k] - 128.0, y = tc.v[k] - 128.0;
    h.total += x * x + y * y;
  }
  // Each cell's colour on the HSV circle, once.
  std::array<Hsv, kCells> cell;
  for (size_t k = 0; k < kCells; ++k) {
    const double yk = ys[k], cb = sc.u[k] - 128.0, cr = sc.v[k] - 128.0;
    cell[k] = to_hsv(yk + 1.402 * cr, yk - 0.344136 * cb - 0.714136 * cr, yk + 1.772 * cb);
  }
  // Unexplained chroma after turning by `degrees` and the best saturation factor
  // (left in `scale`).
  double scale = 0;
  auto unexplained = [&](double degrees) {
    double pp = 0, pt = 0;
    for (size_t k = 0; k < kCells; ++k) {
      double r, g, b;
      from_hsv(cell[k], degrees / 60.0, r, g, b);
      const double y = 0.299 * r + 0.587 * g + 0.114 * b;
      const double pu = (b - y) / 1.772, pv = (r - y) / 1.402;
      pp += pu * pu + pv * pv;
      pt += pu * (tc.u[k] - 128.0) + pv * (tc.v[k] - 128.0);
    }
    scale = pp > 0 && pt > 0 ? pt / pp : 0;
    return pp > 0 && pt > 0 ? h.total - pt * pt / pp : h.total;
  };
  h.unexplained = unexplained(0);
  h.scale = scale;
  for (int d = std::max(around - reach, around - 175); d <= std::min(around + reach, around + 180); d += 5) {
    const double e = unexplained(d);
    if (e < h.unexplained) {
      h.unexplained = e;
      h.degrees = d;
      h.scale = scale;
    }
  }
  const double coarse = h.degrees;
  for (int d = -4; d <= 4; ++d) {
    const double e = unexplained(coarse + d);
    if (e < h.unexplained) {
      h.unexplained = e;
      h.degrees = coarse + d;
      h.scale = scale;
    }
  }
  return h;
}

bool hue_turn_consistent(const Thumbnail& src, const ChromaCells& sc, const ChromaCells& tc, double alpha_re, double alpha_im) {
  // |arg alpha| < 20 degrees (no libm call: the same bits on every processor).
  if (alpha_re > 0 && std::fabs(alpha_im) < kTanHueMinTurn * alpha_re) return true;
  if (alpha_re * alpha_re + alpha_im * alpha_im < 0.25 * 0.25) return true;  // mostly gray: nothing turned
  const HueTurn h = best_hue_turn(src, sc, tc);
  return h.unexplained <= kHueResidual * (h.total + kChromaFloorSs);
}

// The colour checks of a pair whose gray pictures match: the chroma fit's
// unexplained share (recorded in m.chroma) within max_chroma, its largest share in
// a 2x2-cell window (m.chroma_local) within max_chroma_local, and a turn of the
// chroma only as a hue turn of the whole picture.
bool colours_agree(const Thumbnail& ta, const Thumbnail& b, const ChromaCells& ca, const ChromaCells& cb, const MatchSettings& s,
                   Match& m) {
  const ChromaFit cf = chroma_unexplained(ta, b, ca, cb);
  m.chroma = static_cast<float>(cf.share);
  m.chroma_local = static_cast<float>(cf.local);
  if (cf.share < 0) return true;
  if (cf.share > s.max_chroma || cf.local > s.max_chroma_local) return false;
  return cf.a_src ? hue_turn_consistent(ta, ca, cb, cf.alpha_re, cf.alpha_im) : hue_turn_consistent(b, cb, ca, cf.alpha_re, cf.alpha_im);
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

// Least squares by the normal equations: Cholesky of the Gram matrix, a
// regressor that the earlier ones already span (pivot below 1e-9 of its own
// square) left out. Returns the explained sum of squares and the coefficients.
constexpr int kFitMax = 8;
double solve_normal(const double (&gram)[kFitMax][kFitMax], const double* rhs, int n, double* c) {
  double chol[kFitMax][kFitMax] = {}, z[kFitMax] = {};
  bool used[kFitMax] = {};
  for (int k = 0; k < n; ++k) {
    double d = gram[k][k];
    for (int l = 0; l < k; ++l) d -= chol[k][l] * chol[k][l];
    if (!(d > 1e-9 * gram[k][k]) || gram[k][k] <= 0) continue;
    used[k] = true;
    chol[k][k] = std::sqrt(d);
    for (int m = k + 1; m < n; ++m) {
      double v = gram[m][k];
      for (int l = 0; l < k; ++l) v -= chol[m][l] * chol[k][l];
      chol[m][k] = v / chol[k][k];
    }
  }
  // Forward: L z = rhs (explained = |z|^2), back: L^T c = z.
  double explained = 0;
  for (int k = 0; k < n; ++k) {
    if (!used[k]) continue;
    double v = rhs[k];
    for (int l = 0; l < k; ++l) v -= chol[k][l] * z[l];
    z[k] = v / chol[k][k];
    explained += z[k] * z[k];
  }
  for (int k = n - 1; k >= 0; --k) {
    c[k] = 0;
    if (!used[k]) continue;
    double v = z[k];
    for (int m = k + 1; m < n; ++m) v -= chol[m][k] * c[m];
    c[k] = v / chol[k][k];
  }
  return explained;
}

// A change of the whole picture's colours on the HSV circle: the turn and the
// saturation factor that take a's colours to b's. Found when the colour check's
// alpha turns the chroma by 10 degrees or more or scales it by 10% or more
// (smaller changes move the gray levels too little to matter) and keeps at least
// a quarter of it; when that fit leaves at most kChangeShare of the chroma's
// variation unexplained; and when the best HSV change of the more colourful
// side's cells leaves at most kHueResidual of the other's chroma about neutral
// unexplained (as the hue-turn check asks). Measured on the planted sets
// (bench/lookalike_truth): hue and saturation copies leave shares of at most
// 0.036; pairs of rendered scenes that pass the HSV test, 0.16 at the median
// (an object added or repainted on a coloured backdrop explains little of the
// variation but much of the chroma about neutral is the backdrop's).
struct ColourChange {
  bool found = false;
  double degrees = 0, scale = 1;
};
constexpr double kTanFitMinTurn = 0.17632698070846498;  // tan(10 degrees)
constexpr double kChangeShare = 0.1;
// cos and sin of 0, 5, ..., 355 degrees (Python's math.cos and math.sin, repr).
constexpr double kDirections[72][2] = {
    {1.0, 0.0},
    {0.9961946980917455, 0.08715574274765817},
    {0.984807753012208, 0.17364817766693033},
    {0.9659258262890683, 0.25881904510252074},
    {0.9396926207859084, 0.3420201433256687},
    {0.9063077870366499, 0.42261826174069944},
    {0.8660254037844387, 0.49999999999999994},
    {0.8191520442889918, 0.573576436351046},
    {0.766044443118978, 0.6427876096865393},
    {0.7071067811865476, 0.7071067811865475},
    {0.6427876096865394, 0.766044443118978},
    {0.5735764363510462, 0.8191520442889918},
    {0.5000000000000001, 0.8660254037844386},
    {0.42261826174069944, 0.9063077870366499},
    {0.3420201433256688, 0.9396926207859083},
    {0.25881904510252074, 0.9659258262890683},
    {0.17364817766693041, 0.984807753012208},
    {0.08715574274765814, 0.9961946980917455},
    {6.123233995736766e-17, 1.0},
    {-0.08715574274765824, 0.9961946980917455},
    {-0.1736481776669303, 0.984807753012208},
    {-0.25881904510252085, 0.9659258262890683},
    {-0.3420201433256687, 0.9396926207859084},
    {-0.42261826174069933, 0.90630778703665},
    {-0.4999999999999998, 0.8660254037844387},
    {-0.5735764363510462, 0.8191520442889917},
    {-0.6427876096865394, 0.766044443118978},
    {-0.7071067811865475, 0.7071067811865476},
    {-0.7660444431189779, 0.6427876096865395},
    {-0.8191520442889919, 0.5735764363510459},
    {-0.8660254037844387, 0.49999999999999994},
    {-0.9063077870366499, 0.4226182617406995},
    {-0.9396926207859083, 0.3420201433256689},
    {-0.9659258262890682, 0.258819045102521},
    {-0.984807753012208, 0.17364817766693028},
    {-0.9961946980917455, 0.0871557427476582},
    {-1.0, 1.2246467991473532e-16},
    {-0.9961946980917455, -0.08715574274765794},
    {-0.984807753012208, -0.17364817766693047},
    {-0.9659258262890683, -0.2588190451025208},
    {-0.9396926207859084, -0.34202014332566866},
    {-0.90630778703665, -0.4226182617406993},
    {-0.8660254037844386, -0.5000000000000001},
    {-0.8191520442889918, -0.5735764363510462},
    {-0.766044443118978, -0.6427876096865393},
    {-0.7071067811865477, -0.7071067811865475},
    {-0.6427876096865395, -0.7660444431189779},
    {-0.5735764363510464, -0.8191520442889916},
    {-0.5000000000000004, -0.8660254037844384},
    {-0.42261826174069916, -0.90630778703665},
    {-0.34202014332566855, -0.9396926207859084},
    {-0.25881904510252063, -0.9659258262890683},
    {-0.17364817766693033, -0.984807753012208},
    {-0.08715574274765825, -0.9961946980917455},
    {-1.8369701987210297e-16, -1.0},
    {0.08715574274765789, -0.9961946980917455},
    {0.17364817766692997, -0.9848077530122081},
    {0.2588190451025203, -0.9659258262890684},
    {0.342020143325669, -0.9396926207859083},
    {0.4226182617406996, -0.9063077870366499},
    {0.5000000000000001, -0.8660254037844386},
    {0.573576436351046, -0.8191520442889918},
    {0.6427876096865393, -0.7660444431189781},
    {0.7071067811865474, -0.7071067811865477},
    {0.7660444431189778, -0.6427876096865396},
    {0.8191520442889916, -0.5735764363510465},
    {0.8660254037844384, -0.5000000000000004},
    {0.90630778703665, -0.4226182617406992},
    {0.9396926207859084, -0.3420201433256686},
    {0.9659258262890683, -0.2588190451025207},
    {0.984807753012208, -0.1736481776669304},
    {0.9961946980917455, -0.08715574274765832}

};
ColourChange colour_change(const Thumbnail& a, const Thumbnail& b, const ChromaCells& ca, const ChromaCells& cb) {
  ColourChange c;
  const ChromaFit cf = chroma_unexplained(a, b, ca, cb);
  if (cf.share < 0 || cf.share > kChangeShare) return c;
  const double a2 = cf.alpha_re * cf.alpha_re + cf.alpha_im * cf.alpha_im;
  if (a2 < 0.25 * 0.25) return c;
  const bool turned = !(cf.alpha_re > 0 && std::fabs(cf.alpha_im) < kTanFitMinTurn * cf.alpha_re);
  if (!turned && a2 > 0.9 * 0.9 && a2 < 1.1 * 1.1) return c;
  // The HSV turn lies near the chroma fit's turn, arg alpha, so the search
  // covers 45 degrees either side of it, to the nearest 5 degrees (the planted
  // sets' figures are the same as with the whole circle, which the hue-turn
  // check searches). The direction is the table's nearest (no libm call: the
  // same bits on every processor).
  int around = 0;
  double best_cos = -1e300;
  for (int k = 0; k < 72; ++k) {
    const double d = cf.alpha_re * kDirections[k][0] + cf.alpha_im * kDirections[k][1];
    if (d > best_cos) {
      best_cos = d;
      around = k <= 36 ? 5 * k : 5 * k - 360;
    }
  }
  const HueTurn h = cf.a_src ? best_hue_turn(a, ca, cb, around, 45) : best_hue_turn(b, cb, ca, -around, 45);
  if (!(h.unexplained <= kHueResidual * (h.total + kChromaFloorSs)) || h.scale < 0.05) return c;
  c.found = true;
  c.degrees = cf.a_src ? h.degrees : -h.degrees;
  c.scale = cf.a_src ? h.scale : 1.0 / h.scale;
  return c;
}
ColourChange inverse(const ColourChange& c) {
  ColourChange r = c;
  r.degrees = -c.degrees;
  r.scale = 1.0 / c.scale;
  return r;
}

// The tone-and-colour fit: the target's gray plane fitted by least squares as a
// function of the source's pixels: a cubic tone curve of the gray level (a
// gamma, a contrast or brightness change with clipping at one end) plus, when the
// source has colour (`colour`: its chroma cells; nullptr for a gray source),
// linear terms in its chroma (bilinear from the 8x8 cells: Cb, Cr, and the
// largest and smallest of R - Y, G - Y, B - Y), which is how a hue or saturation
// change moves the gray level of coloured pixels, and the gray change of
// `change` pixel by pixel (when found). Returns the
// correlation the fit explains, sqrt(explained / total) of the target's
// variation, and, when `pred` is given, writes the fitted plane (centred) there.
double tone_colour_fit(const Thumbnail& src, const Thumbnail& dst, const ChromaCells* colour, const ColourChange& change,
                       float* pred) {
  double gram[kFitMax][kFitMax] = {}, rhs[kFitMax] = {}, c[kFitMax] = {}, yy = 0;
  if (!colour) {
    // A gray source: the tone curve depends on the source's level alone, so the
    // sums come from per-level counts and sums of the target (four interleaved
    // tables, merged), all in integers, then moments of g = level / 255.
    uint32_t count[4][256] = {}, sum[4][256] = {};
    uint64_t sy = 0, syy = 0;
    for (size_t i = 0; i < 1024; i += 4)
      for (size_t l = 0; l < 4; ++l) {
        const uint32_t v = src[i + l], y = dst[i + l];
        ++count[l][v];
        sum[l][v] += y;
        sy += y;
        syy += y * y;
      }
    double m[7] = {}, r[4] = {};  // sum of g^k over pixels, sum of g^k y
    for (int v = 0; v < 256; ++v) {
      const uint32_t nv = count[0][v] + count[1][v] + count[2][v] + count[3][v];
      if (nv == 0) continue;
      const double sv = double(sum[0][v] + sum[1][v] + sum[2][v] + sum[3][v]);
      const double g = double(v) / 255.0;
      double p = 1;
      for (int k = 0; k <= 6; ++k) {
        m[k] += double(nv) * p;
        if (k <= 3) r[k] += sv * p;
        p *= g;
      }
    }
    yy = double(syy) - double(sy) * double(sy) / 1024.0;
    if (yy <= 0) return 0;
    for (int k = 0; k < 3; ++k) {
      rhs[k] = r[k + 1] - m[k + 1] / 1024.0 * r[0];
      for (int l = 0; l < 3; ++l) gram[k][l] = m[k + l + 2] - m[k + 1] * m[l + 1] / 1024.0;
    }
    const double explained = solve_normal(gram, rhs, 3, c);
    if (pred) {
      float lut[256];
      for (int v = 0; v < 256; ++v) {
        const double g = double(v) / 255.0;
        lut[v] = float(c[0] * (g - m[1] / 1024.0) + c[1] * (g * g - m[2] / 1024.0) + c[2] * (g * g * g - m[3] / 1024.0));
      }
      for (size_t i = 0; i < 1024; ++i) pred[i] = lut[src[i]];
    }
    return std::sqrt(std::clamp(explained / yy, 0.0, 1.0));
  }
  constexpr int n = kFitMax;
  // Centred regressors, one plane each: g, g^2, Cb, Cr, max and min of the
  // channels' offsets, g^3, the gray change of the best hue turn.
  alignas(32) float x[kFitMax][1024];
  for (size_t i = 0; i < 1024; ++i) {
    const float g = float(src[i]) * (1.0f / 255.0f);
    x[0][i] = g;
    x[1][i] = g * g;
    x[6][i] = g * g * g;
  }
  // The chroma cells interpolated bilinearly between their centres (4 c + 1.5),
  // edges held. (The cells, not the full chroma: regressors as sharp as the
  // pixels would let an object that only one picture has explain its own gray
  // footprint; measured on the rendered scenes, 8 distinct pairs joined against 6.)
  for (int p = 0; p < 2; ++p) {
    const double* plane = p == 0 ? colour->u.data() : colour->v.data();
    for (int r = 0; r < kThumbSide; ++r) {
      const float fy = std::clamp((float(r) - 1.5f) * 0.25f, 0.0f, float(kCellSide - 1));
      const int y0 = std::min(int(fy), kCellSide - 2);
      const float wy = fy - float(y0);
      for (int cc = 0; cc < kThumbSide; ++cc) {
        const float fx = std::clamp((float(cc) - 1.5f) * 0.25f, 0.0f, float(kCellSide - 1));
        const int x0 = std::min(int(fx), kCellSide - 2);
        const float wx = fx - float(x0);
        const double* q = plane + y0 * kCellSide + x0;
        const float top = float(q[0]) + wx * (float(q[1]) - float(q[0]));
        const float bottom = float(q[kCellSide]) + wx * (float(q[kCellSide + 1]) - float(q[kCellSide]));
        x[2 + p][size_t(r * kThumbSide + cc)] = (top + wy * (bottom - top) - 128.0f) * (1.0f / 255.0f);
      }
    }
  }
  // The largest and smallest of R - Y, G - Y, B - Y (BT.601, from Cb and Cr):
  // where the brightest and darkest channel sit above and below the gray level.
  // An HSV saturation change keeps the brightest channel and moves the others
  // towards it, and a hue change keeps the brightest and darkest, so the gray
  // level they leave is nearly linear in these two and the gray.
  for (size_t i = 0; i < 1024; ++i) {
    const float u = x[2][i], v = x[3][i];
    const float r = 1.402f * v, b = 1.772f * u, g = -0.344136f * u - 0.714136f * v;
    x[4][i] = std::max(r, std::max(g, b));
    x[5][i] = std::min(r, std::min(g, b));
  }
  // The change of gray level that the pair's colour change (an HSV turn and
  // saturation factor, colour_change) makes to each pixel's colour, from the
  // full 32x32 chroma: how a hue or saturation change moves each pixel's gray
  // level, which depends on its own hue and saturation. 0 when the pair has no
  // such change.
  const uint8_t* cb = src.data() + kGrayBytes;
  const uint8_t* cr = cb + kChromaPlane;
  for (size_t i = 0; i < 1024; ++i) {
    if (!change.found) {
      x[7][i] = 0;
      continue;
    }
    const double y = src[i], u = double(cb[i]) - 128.0, v = double(cr[i]) - 128.0;
    double r = y + 1.402 * v, g = y - 0.344136 * u - 0.714136 * v, b = y + 1.772 * u;
    hsv_change(r, g, b, change.degrees, change.scale);
    x[7][i] = float((0.299 * r + 0.587 * g + 0.114 * b - y) * (1.0 / 255.0));
  }
  for (int k = 0; k < n; ++k) {
    const float mean = float(sum1024(x[k]) / 1024.0);
    for (size_t i = 0; i < 1024; ++i) x[k][i] -= mean;
  }
  alignas(32) float y[1024];
  for (size_t i = 0; i < 1024; ++i) y[i] = float(dst[i]);
  const float my = float(sum1024(y) / 1024.0);
  for (size_t i = 0; i < 1024; ++i) y[i] -= my;
  yy = dot1024(y, y);
  if (yy <= 0) return 0;
  for (int k = 0; k < n; ++k) {
    rhs[k] = dot1024(x[k], y);
    for (int l = 0; l <= k; ++l) gram[k][l] = gram[l][k] = dot1024(x[k], x[l]);
  }
  const double explained = solve_normal(gram, rhs, n, c);
  if (pred)
    for (size_t i = 0; i < 1024; ++i) {
      double v = 0;
      for (int k = 0; k < n; ++k) v += c[k] * double(x[k][i]);
      pred[i] = float(v);
    }
  return std::sqrt(std::clamp(explained / yy, 0.0, 1.0));
}

// Whether a thumbnail's chroma varies (chroma_unexplained's rule).
bool has_colour(const Thumbnail& t) {
  if (neutral_chroma(t)) return false;  // a gray image's (the common case, checked fast)
  return centred_chroma(chroma_cells(t)).ss >= 2.0 * double(kCells) * kColourless * kColourless;
}

}  // namespace

MatchProfile match_profile(const Thumbnail& thumb) {
  MatchProfile p;
  p.stats = thumb_stats(thumb);
  p.flat = thumb_is_flat(p.stats);
  p.colour = has_colour(thumb);
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

MatchProfile value_profile(const Thumbnail& thumb) {
  if (!has_colour(thumb)) {
    MatchProfile p;
    p.flat = true;
    return p;
  }
  Thumbnail v;
  const uint8_t* cb = thumb.data() + kGrayBytes;
  const uint8_t* cr = cb + kChromaPlane;
  for (size_t i = 0; i < kGrayBytes; ++i) {
    const double y = thumb[i], u = double(cb[i]) - 128.0, w = double(cr[i]) - 128.0;
    const double top = std::max({y + 1.402 * w, y - 0.344136 * u - 0.714136 * w, y + 1.772 * u});
    v[i] = static_cast<uint8_t>(std::clamp(std::lround(top), 0L, 255L));
  }
  std::fill(v.begin() + kGrayBytes, v.end(), uint8_t{128});
  MatchProfile p = match_profile(v);
  p.colour = true;
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

// Whether the screen's bound lets the pair's blur-matched correlation reach
// `gate`: the gate of the resampled and re-encoded comparisons (each only when
// pair_settings asked for it), min(kResampleGate, its own threshold).
bool imitation_may_reach(const MatchProfile& pa, int t, const MatchProfile& pb, double own_correlation) {
  if (pa.flat || pb.flat) return false;
  const BlurCandidates c = blur_candidates(pa, pb);
  return blur_may_reach(pa, pb, c, low_pair(pa, t, pb, c), std::min(kResampleGate, own_correlation));
}
bool resample_tried(const MatchProfile& pa, int t, const MatchProfile& pb, const MatchSettings& s) {
  return s.resample.width > 0 && imitation_may_reach(pa, t, pb, s.resample.min_correlation);
}
bool jpeg_tried(const MatchProfile& pa, int t, const MatchProfile& pb, const MatchSettings& s) {
  return s.jpeg.quality > 0 && imitation_may_reach(pa, t, pb, s.jpeg.min_correlation);
}

}  // namespace

double fit_floor(const MatchSettings& s, bool colour) {
  return colour ? std::min(s.fit_floor, kColourFitFloor) : s.fit_floor;
}

double fit_gate(const MatchSettings& s, bool colour) {
  // With the fit off (fit_floor at or above min_correlation) the gate is the threshold itself.
  if (s.fit_floor >= s.min_correlation) return s.min_correlation;
  return colour ? fit_floor(s, true) : std::clamp(kFitGate, s.fit_floor, s.min_correlation);
}

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
  // The blurred bound at min_correlation, or at the fit's gate when the fit is
  // on, or at the resampled comparison's gate.
  // The gates are bounds at different thresholds of one quantity: the lowest
  // that applies decides.
  double gate = fit_gate(settings, a.colour && b.colour);
  if (settings.resample.width > 0) gate = std::min(gate, std::min(kResampleGate, settings.resample.min_correlation));
  if (settings.jpeg.quality > 0) gate = std::min(gate, std::min(kResampleGate, settings.jpeg.min_correlation));
  return blur_may_reach(a, b, c, lp, gate);
}

namespace {

// The comparison of the thumbnails as they are (match_thumbnails without the
// resampled comparison).
Match match_direct(const Thumbnail& ta, const MatchProfile& pa, int t, const Thumbnail& b, const MatchProfile& pb,
                   const MatchSettings& s, std::vector<float>* a_spectrum) {
  Match m;
  m.correlation = static_cast<float>(thumb_correlation(ta, pa.stats, b, pb.stats));
  if (pa.flat || pb.flat) {  // the flat rule decides the gray pictures; the colours still count
    m.joined = m.correlation >= s.min_correlation && colours_agree(ta, b, chroma_cells(ta), chroma_cells(b), s, m);
    return m;
  }
  const double plain = m.correlation;
  // Each side's chroma cells, computed once a pair when first needed.
  ChromaCells ca, cb;
  bool have_a = false, have_b = false;
  auto cells_a = [&]() -> const ChromaCells& {
    if (!have_a) ca = chroma_cells(ta), have_a = true;
    return ca;
  };
  auto cells_b = [&]() -> const ChromaCells& {
    if (!have_b) cb = chroma_cells(b), have_b = true;
    return cb;
  };
  std::vector<float> blurred;  // the blurred side's pixels, when a blur step matched best
  // The blur steps, unless the low blocks prove that none can reach the
  // threshold (blur_may_reach: a bound, so the result is the same). They are
  // tried even when the thumbnails as they are reach it: the best step also
  // gives the residual that the local check measures.
  const BlurCandidates cand = blur_candidates(pa, pb);
  const LowPair lp = low_pair(pa, t, pb, cand);
  const bool may_reach = blur_may_reach(pa, pb, cand, lp, s.min_correlation);
  if (may_reach) {
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
  // The tone-and-colour fit, for pairs whose plain correlation reaches the fit's
  // floor but that neither the plain nor a blurred comparison joins: both ways
  // round (each side as the source), the better kept.
  alignas(32) float fitted[1024];
  // Pairs in colour whose colours changed as a whole (colour_change) are also
  // fitted with the change's regressor, which predicts pixel by pixel how a hue
  // or saturation change moves the gray levels, and from a lower floor and gate
  // (kColourFitFloor): such a change moves coloured pixels' gray levels far more
  // than a tone change does. A fit with that regressor must come closer than
  // min_correlation: leave at most kColourPathShare of the allowance
  // (1 - min_correlation) unexplained. Hue and saturation copies of photographs
  // reach 0.999 and more through it; distinct smooth pictures of about one colour
  // each (crops of a photograph's blurred background), whose colours a turn maps
  // onto each other, reached 0.995-0.998 (docs/lookalikes.md). Pairs whose plain
  // correlation reaches fit_floor keep the fit without it at min_correlation.
  const bool colour = pa.colour && pb.colour;
  const bool via_colour = plain < s.fit_floor;  // only the colour floor lets it be fitted
  if (m.correlation < s.min_correlation && s.fit_floor < s.min_correlation && plain >= fit_floor(s, colour) &&
      blur_may_reach(pa, pb, cand, lp, fit_gate(s, colour && via_colour))) {
    const ColourChange none;
    ColourChange change;
    const ColourChange* won = nullptr;
    auto attempt = [&](const ColourChange& c, double need) {
      const double ab = tone_colour_fit(ta, b, pa.colour ? &cells_a() : nullptr, c, nullptr);
      const double ba = tone_colour_fit(b, ta, pb.colour ? &cells_b() : nullptr, inverse(c), nullptr);
      const double best = std::max(ab, ba);
      if (best > m.correlation && best >= need) {
        m.correlation = static_cast<float>(best);
        m.fitted = true;
        m.fitted_a = ab >= ba;
        won = &c;
      }
    };
    if (!via_colour) attempt(none, 0.0);
    // The change's regressor only when the fit without it does not join (the
    // change's search is the costlier part).
    if (colour && m.correlation < s.min_correlation && (change = colour_change(ta, b, cells_a(), cells_b())).found)
      attempt(change, 1.0 - (1.0 - s.min_correlation) * kColourPathShare);
    if (won && m.correlation >= s.min_correlation) {  // the fitted plane, for the local check
      if (m.fitted_a) tone_colour_fit(ta, b, pa.colour ? &cells_a() : nullptr, *won, fitted);
      else tone_colour_fit(b, ta, pb.colour ? &cells_b() : nullptr, inverse(*won), fitted);
    }
  }
  if (m.correlation < s.min_correlation) return m;
  if (m.fitted)
    m.local = static_cast<float>(m.fitted_a ? local_residual(fitted, b.data()) : local_residual(ta.data(), fitted));
  else if (m.blur_step == 0)
    m.local = static_cast<float>(local_residual(ta.data(), b.data()));
  else
    m.local = static_cast<float>(m.blurred_a ? local_residual(blurred.data(), b.data())
                                             : local_residual(ta.data(), blurred.data()));
  if (m.local > s.max_local) return m;
  m.joined = colours_agree(ta, b, cells_a(), cells_b(), s, m);
  return m;
}

}  // namespace

Match match_thumbnails(const Thumbnail& ta, const MatchProfile& pa, int t, const Thumbnail& b, const MatchProfile& pb,
                       const MatchSettings& s, std::vector<float>* a_spectrum) {
  const Match direct = match_direct(ta, pa, t, b, pb, s, a_spectrum);
  if (direct.joined) return direct;
  if (jpeg_tried(pa, t, pb, s) && thumb_correlation(ta, pa.stats, b, pb.stats) >= kJpegFloor) {
    // a re-encoded as b was: the same turned thumbnail is compared with many
    // partners of one quality in a row, so the last re-encoding is kept per
    // thread (checked by its content).
    struct Last {
      Thumbnail in{}, out{};
      int width = 0, height = 0, quality = 0;
      MatchProfile profile;
    };
    thread_local Last last;
    if (last.quality != s.jpeg.quality || last.width != s.jpeg.width || last.height != s.jpeg.height || last.in != ta) {
      last.in = ta;
      last.width = s.jpeg.width;
      last.height = s.jpeg.height;
      last.quality = s.jpeg.quality;
      jpeg_thumbnail(ta, s.jpeg.width, s.jpeg.height, s.jpeg.quality, last.out);
      last.profile = match_profile(last.out);
    }
    MatchSettings own = s;
    own.resample = {};
    own.jpeg = {};
    own.min_correlation = s.jpeg.min_correlation;
    Match m = match_direct(last.out, last.profile, 0, b, pb, own, nullptr);
    if (m.joined) {
      m.jpeg_quality = s.jpeg.quality;
      return m;
    }
  }
  if (!resample_tried(pa, t, pb, s)) return direct;
  MatchSettings own = s;
  own.resample = {};
  own.min_correlation = s.resample.min_correlation;
  Thumbnail r;
  resampled_for_pair(s.resample.on_a ? ta : b, s.resample.on_a ? b : ta, s.resample, r);
  Match m = s.resample.on_a ? match_direct(r, match_profile(r), 0, b, pb, own, nullptr)
                            : match_direct(ta, pa, t, r, match_profile(r), own, a_spectrum);
  if (!m.joined) return direct;
  m.resampled = true;
  return m;
}

Match match_thumbnails(const Thumbnail& a, int t, const Thumbnail& b, const MatchSettings& s) {
  Thumbnail ta;
  turn_thumbnail(a, ta, t);
  return match_thumbnails(ta, match_profile(a), t, b, match_profile(b), s);
}

}  // namespace tamis
