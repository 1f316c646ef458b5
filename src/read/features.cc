#include "tamis/read/features.h"

#include <algorithm>
#include <cmath>
#include <limits>

#include <opencv2/imgproc.hpp>

#include "tamis/base/exact_math.h"

namespace tamis {

namespace {
constexpr double kFlatSd = 2.0;  // grey levels: below this a thumbnail is flat
}  // namespace

double thumb_sd(const ThumbStats& s) {
  constexpr double kN = 1024;
  const double m = s.sum / kN;
  return std::sqrt(std::max(0.0, double(s.sum_sq) - kN * m * m) / kN);
}

cv::Mat hash_thumbnail(const cv::Mat& reduced) {
  cv::Mat gray;
  if (reduced.channels() == 1) {
    gray = reduced;
  } else if (reduced.channels() == 3) {
    cv::cvtColor(reduced, gray, cv::COLOR_BGR2GRAY);
  } else {
    cv::cvtColor(reduced, gray, cv::COLOR_BGRA2GRAY);
  }
  cv::Mat out;
  bool shrink = gray.cols >= 32 && gray.rows >= 32;
  cv::resize(gray, out, cv::Size(32, 32), 0, 0, shrink ? cv::INTER_AREA : cv::INTER_LINEAR);
  return out;
}

namespace {

// Rows 0..7 of the orthonormal 32-point DCT-II matrix, in double.
struct DctRows {
  double c[8][32];
  DctRows() {
    for (int u = 0; u < 8; ++u)
      for (int x = 0; x < 32; ++x)
        c[u][x] = (u == 0 ? std::sqrt(1.0 / 32) : std::sqrt(2.0 / 32)) * cos_pi((2 * x + 1) * u / 64.0);
  }
};

}  // namespace

// The low 8x8 block of the orthonormal 2-D DCT-II of a 32x32 image, block[8u + v]:
// C P C^T restricted to rows u < 8 and columns v < 8, in double. Row y and row
// 31 - y (and column x and 31 - x) are folded first, as C[u][31 - y] = (-1)^u C[u][y].
// Every row of C but the first sums to 0, so for u > 0 (v > 0) a column's (row's)
// first value is subtracted first: the result is the same, and a constant column
// or row gives exactly 0, as scipy's DCT does (a flat image hashes to its DC bit
// alone, not to rounding noise).
void dct_low_block(const uint8_t* p, double block[64]) {
  static const DctRows d;
  double sum[16][32], dif[16][32], col_total[32];
  for (int x = 0; x < 32; ++x) col_total[x] = 0;
  for (int y = 0; y < 16; ++y) {
    const uint8_t* a = p + 32 * y;
    const uint8_t* b = p + 32 * (31 - y);
    for (int x = 0; x < 32; ++x) {
      const int qa = a[x] - p[x], qb = b[x] - p[x];  // exact integers
      sum[y][x] = double(qa + qb);
      dif[y][x] = double(qa - qb);
      col_total[x] += double(a[x] + b[x]);
    }
  }
  for (int u = 0; u < 8; ++u) {
    double row[32] = {};
    if (u == 0) {
      for (int x = 0; x < 32; ++x) row[x] = d.c[0][0] * col_total[x];
    } else {
      const auto& src = (u & 1) ? dif : sum;
      for (int y = 0; y < 16; ++y) {
        const double c = d.c[u][y];
        for (int x = 0; x < 32; ++x) row[x] += c * src[y][x];
      }
    }
    double total = 0, s2[16], d2[16];
    for (int x = 0; x < 16; ++x) {
      const double ra = row[x] - row[0], rb = row[31 - x] - row[0];
      s2[x] = ra + rb;
      d2[x] = ra - rb;
      total += row[x] + row[31 - x];
    }
    block[u * 8] = d.c[0][0] * total;
    for (int v = 1; v < 8; ++v) {
      const double* half = (v & 1) ? d2 : s2;
      double acc = 0;
      for (int x = 0; x < 16; ++x) acc += half[x] * d.c[v][x];
      block[u * 8 + v] = acc;
    }
  }
}



namespace {

// Sorts 16 values in each of 4 columns (v[i][c]: value i of column c) with
// Batcher's odd-even merge sort network (63 comparators; Knuth, TAOCP vol. 3,
// 5.3.4): branch-free min/max, the 4 columns side by side. (Checked on all 2^16
// inputs of 0s and 1s, which by the 0-1 principle proves it sorts any input.)
void sort16x4(double v[16][4]) {
  static constexpr uint8_t kNet[63][2] = {
      {0, 1},   {2, 3},   {0, 2},   {1, 3},   {1, 2},   {4, 5},   {6, 7},   {4, 6},   {5, 7},   {5, 6},
      {0, 4},   {2, 6},   {2, 4},   {1, 5},   {3, 7},   {3, 5},   {1, 2},   {3, 4},   {5, 6},   {8, 9},
      {10, 11}, {8, 10},  {9, 11},  {9, 10},  {12, 13}, {14, 15}, {12, 14}, {13, 15}, {13, 14}, {8, 12},
      {10, 14}, {10, 12}, {9, 13},  {11, 15}, {11, 13}, {9, 10},  {11, 12}, {13, 14}, {0, 8},   {4, 12},
      {4, 8},   {2, 10},  {6, 14},  {6, 10},  {2, 4},   {6, 8},   {10, 12}, {1, 9},   {5, 13},  {5, 9},
      {3, 11},  {7, 15},  {7, 11},  {3, 5},   {7, 9},   {11, 13}, {1, 2},   {3, 4},   {5, 6},   {7, 8},
      {9, 10},  {11, 12}, {13, 14}};
  for (const auto& [a, b] : kNet)
    for (int c = 0; c < 4; ++c) {
      const double x = v[a][c], y = v[b][c];
      v[a][c] = std::min(x, y);
      v[b][c] = std::max(x, y);
    }
}

// Merges two ascending runs of 16 into one of 32, branch-free. `nb`: take run b
// negated and reversed (ascending again).
void merge16(const double* a, const double* b, bool nb, double out[32]) {
  double bb[17], aa[17];
  for (int i = 0; i < 16; ++i) {
    aa[i] = a[i];
    bb[i] = nb ? -b[15 - i] : b[i];
  }
  aa[16] = bb[16] = std::numeric_limits<double>::infinity();
  int i = 0, j = 0;
  for (int k = 0; k < 32; ++k) {
    const bool take_a = aa[i] <= bb[j];
    out[k] = take_a ? aa[i] : bb[j];
    i += take_a;
    j += !take_a;
  }
}

// The 32nd and 33rd smallest of the 64 values of two ascending runs of 32 (run b
// read negated and reversed when `nb`), by binary search on how many come from a.
std::pair<double, double> middle_pair(const double* a, const double* b, bool nb) {
  constexpr double kInf = std::numeric_limits<double>::infinity();
  auto A = [&](int i) { return i < 0 ? -kInf : i >= 32 ? kInf : a[i]; };
  auto B = [&](int i) { return i < 0 ? -kInf : i >= 32 ? kInf : (nb ? -b[31 - i] : b[i]); };
  int lo = 0, hi = 32;  // i values from a and 32 - i from b are the 32 smallest
  while (lo < hi) {
    const int i = (lo + hi) / 2;
    if (A(i) < B(31 - i)) {
      lo = i + 1;  // a's next value is below b's last taken: take more from a
    } else {
      hi = i;
    }
  }
  const int i = lo;
  return {std::max(A(i - 1), B(31 - i)), std::min(A(i), B(32 - i))};
}

// Transposes an 8x8 bit matrix held row by row in a uint64 (Warren, Hacker's
// Delight, 2nd ed., 7-3).
uint64_t transpose8x8(uint64_t x) {
  uint64_t t = (x ^ (x >> 7)) & 0x00AA00AA00AA00AAull;
  x ^= t ^ (t << 7);
  t = (x ^ (x >> 14)) & 0x0000CCCC0000CCCCull;
  x ^= t ^ (t << 14);
  t = (x ^ (x >> 28)) & 0x00000000F0F0F0F0ull;
  x ^= t ^ (t << 28);
  return x;
}

}  // namespace

std::array<uint64_t, kDihedralCount> dct_hashes(const cv::Mat& thumb32) {
  CV_Assert(thumb32.rows == 32 && thumb32.cols == 32 && thumb32.type() == CV_8UC1);
  const cv::Mat t = thumb32.isContinuous() ? thumb32 : thumb32.clone();
  double block[64];
  dct_low_block(t.ptr<uint8_t>(0), block);
  // A mirror negates the coefficients of odd frequency along its axis, so the
  // coefficients fall into four classes by the parity of (u, v), each negated or
  // not as a whole: class 2 (u & 1) + (v & 1) holds the (u, v) with that parity,
  // 16 each, in the order of k = 8u + v. The median of a sign pattern is the mean
  // of the 32nd and 33rd smallest of the four classes with their signs.
  double cls[16][4];
  {
    int count[4] = {0, 0, 0, 0};
    for (int k = 0; k < 64; ++k) {
      const int c = 2 * ((k >> 3) & 1) + (k & 1);
      cls[count[c]++][c] = block[k];
    }
  }
  sort16x4(cls);
  double col[4][16];
  for (int i = 0; i < 16; ++i)
    for (int c = 0; c < 4; ++c) col[c][i] = cls[i][c];
  // Flipping columns negates classes 1 and 3, flipping rows classes 2 and 3. Class
  // 0 merged with class 3 (as is, or negated), class 1 with class 2 (as is, or
  // class 1 negated); both negated is the negated reverse of neither.
  double m03[2][32], m12[2][32];
  merge16(col[0], col[3], false, m03[0]);
  merge16(col[0], col[3], true, m03[1]);
  merge16(col[2], col[1], false, m12[0]);
  merge16(col[2], col[1], true, m12[1]);
  std::array<uint64_t, kDihedralCount> out{};
  // A transpose only reorders the coefficients, so t and t + 4 share the median;
  // the four sign patterns of the mirrors each need their own.
  for (int t4 = 0; t4 < 4; ++t4) {
    const bool flip_rows = t4 & 2, flip_cols = t4 & 1;
    const bool neg3 = flip_rows != flip_cols;
    // class 1 and 2 as (c2 sign, c1 sign): (+,+) m12[0]; (+,-) m12[1]; (-,+) = -(+,-) reversed; (-,-) = -(+,+) reversed
    const double* b = flip_rows ? m12[flip_cols ? 0 : 1] : m12[flip_cols ? 1 : 0];
    const auto [lo, hi] = middle_pair(m03[neg3 ? 1 : 0], b, flip_rows);
    const double median = 0.5 * (lo + hi);
    // Bit k = 8u + v of the code is bit 63 - k.
    uint64_t code = 0;
    for (int k = 0; k < 64; ++k) {
      const bool neg = (flip_rows && ((k >> 3) & 1)) != (flip_cols && (k & 1));
      const double x = neg ? -block[k] : block[k];
      code |= uint64_t{x > median} << (63 - k);
    }
    out[static_cast<size_t>(t4)] = code;
  }
  // Transform 4 + t: transpose, then the mirrors of t. Its coefficient at (u, v)
  // is block[v][u] with the signs of t applied at (u, v), which is the sign
  // pattern t' (rows and columns swapped) applied at (v, u): so its code is the
  // transposed bit matrix of code t', and its median is that of t'.
  for (int t = 0; t < 4; ++t) {
    const int swapped = ((t & 1) << 1) | ((t & 2) >> 1);
    out[static_cast<size_t>(4 + t)] = transpose8x8(out[static_cast<size_t>(swapped)]);
  }
  return out;
}

ImageStats image_stats(const cv::Mat& reduced, uint8_t alpha_min) {
  ImageStats st;
  st.alpha_min = alpha_min;
  cv::Mat gray;
  if (reduced.channels() == 1) {
    gray = reduced;
  } else {
    cv::cvtColor(reduced, gray, reduced.channels() == 3 ? cv::COLOR_BGR2GRAY : cv::COLOR_BGRA2GRAY);
    int max_diff = 0;
    for (int y = 0; y < reduced.rows && max_diff <= 2; ++y) {
      const uint8_t* p = reduced.ptr<uint8_t>(y);
      const int ch = reduced.channels();
      for (int x = 0; x < reduced.cols; ++x, p += ch) {
        max_diff = std::max({max_diff, std::abs(p[0] - p[1]), std::abs(p[1] - p[2])});
      }
    }
    st.channels_equal = max_diff <= 2;
  }
  std::array<uint64_t, 256> hist{};
  for (int y = 0; y < gray.rows; ++y) {
    const uint8_t* p = gray.ptr<uint8_t>(y);
    for (int x = 0; x < gray.cols; ++x) ++hist[p[x]];
  }
  const double n = double(gray.total());
  // p log2 p for a bin of c pixels out of n, remembered per thread for the last n
  // (sets of one image size ask for the same few values again and again).
  thread_local double memo_n = 0;
  thread_local std::vector<double> memo;
  const bool use_memo = gray.total() <= (size_t{1} << 16);
  if (use_memo && memo_n != n) {
    memo.assign(gray.total() + 1, std::numeric_limits<double>::quiet_NaN());
    memo_n = n;
  }
  auto plogp = [&](uint64_t c) {
    if (!use_memo) {
      const double p = double(c) / n;
      return p * std::log2(p);
    }
    double& m = memo[c];
    if (std::isnan(m)) {
      const double p = double(c) / n;
      m = p * std::log2(p);
    }
    return m;
  };
  double mean = 0, sq = 0, entropy = 0;
  for (int v = 0; v < 256; ++v) {
    mean += v * double(hist[v]);
    sq += double(v) * v * double(hist[v]);
    if (hist[v]) entropy -= plogp(hist[v]);
  }
  mean /= n;
  st.luma_mean = static_cast<float>(mean);
  st.luma_std = static_cast<float>(std::sqrt(std::max(0.0, sq / n - mean * mean)));
  st.entropy = static_cast<float>(entropy);
  cv::Mat g = gray;
  int shorter = std::min(gray.cols, gray.rows);
  if (shorter > 128) {
    double f = 128.0 / shorter;
    cv::resize(gray, g, cv::Size(std::max(1, int(gray.cols * f + 0.5)), std::max(1, int(gray.rows * f + 0.5))), 0, 0,
               cv::INTER_AREA);
  }
  st.focus = laplacian_variance(g);
  return st;
}

float laplacian_variance(const cv::Mat& gray) {
  CV_Assert(gray.type() == CV_8UC1 && !gray.empty());
  // What cv::Laplacian(gray, lap, CV_32F) (ksize 1: 4-neighbour kernel, border
  // reflected about the edge pixel) then cv::meanStdDev(lap) give, computed with
  // integer sums: every value is a small integer, so the sums are exact in any
  // order and the result equals OpenCV's bit for bit.
  const int w = gray.cols, h = gray.rows;
  auto reflect = [](int i, int n) { return n == 1 ? 0 : i < 0 ? -i : i >= n ? 2 * n - 2 - i : i; };
  int64_t sum = 0, sum_sq = 0;
  for (int y = 0; y < h; ++y) {
    const uint8_t* up = gray.ptr<uint8_t>(reflect(y - 1, h));
    const uint8_t* row = gray.ptr<uint8_t>(y);
    const uint8_t* down = gray.ptr<uint8_t>(reflect(y + 1, h));
    auto at = [&](int x) { return up[x] + down[x] + row[reflect(x - 1, w)] + row[reflect(x + 1, w)] - 4 * row[x]; };
    // The two edge columns reflect; the columns between need no test (a loop the
    // compiler vectorises). |v| <= 1020, so a row's sums fit 32 bits up to 2000
    // columns of squares; wider rows are summed in pieces.
    const int v0 = at(0);
    sum += v0;
    sum_sq += int64_t{v0} * v0;
    if (w > 1) {
      const int vl = at(w - 1);
      sum += vl;
      sum_sq += int64_t{vl} * vl;
    }
    for (int x0 = 1; x0 < w - 1; x0 += 2000) {
      const int x1 = std::min(w - 1, x0 + 2000);
      int32_t s = 0;
      uint32_t q = 0;
      for (int x = x0; x < x1; ++x) {
        const int v = up[x] + down[x] + row[x - 1] + row[x + 1] - 4 * row[x];
        s += v;
        q += static_cast<uint32_t>(v * v);
      }
      sum += s;
      sum_sq += q;
    }
  }
  const double scale = 1.0 / (double(w) * double(h));
  const double mean = double(sum) * scale;
  const double sd = std::sqrt(std::max(double(sum_sq) * scale - mean * mean, 0.0));
  return static_cast<float>(sd * sd);
}

namespace {

// cos(pi (2x + 1) u / 64) scaled for the orthonormal DCT, x < 16 (rows 31 - x by symmetry).
struct DctTable {
  float c[32][16];
  DctTable() {
    for (int u = 0; u < 32; ++u)
      for (int x = 0; x < 16; ++x)
        c[u][x] = static_cast<float>((u ? std::sqrt(2.0 / 32) : std::sqrt(1.0 / 32)) * cos_pi((2 * x + 1) * u / 64.0));
  }
};
const DctTable& dct_table() {
  static const DctTable t;
  return t;
}

// One separable pass: out[x][u] = sum_y c[u][y'] in[y][x] over the folded rows,
// written transposed, so that two passes give the 2-D transform.
void dct_pass(const float (*in)[32], float (*out)[32]) {
  const DctTable& t = dct_table();
  float sum[16][32], dif[16][32];
  for (int y = 0; y < 16; ++y)
    for (int x = 0; x < 32; ++x) {
      sum[y][x] = in[y][x] + in[31 - y][x];
      dif[y][x] = in[y][x] - in[31 - y][x];
    }
  for (int u = 0; u < 32; ++u) {
    float row[32] = {};
    const auto& src = (u & 1) ? dif : sum;
    for (int y = 0; y < 16; ++y) {
      const float c = t.c[u][y];
      for (int x = 0; x < 32; ++x) row[x] += c * src[y][x];
    }
    for (int x = 0; x < 32; ++x) out[x][u] = row[x];
  }
}

// The inverse pass: out[x][y] = sum_u c[u][y] in[u][x], written transposed.
void idct_pass(const float (*in)[32], float (*out)[32]) {
  const DctTable& t = dct_table();
  for (int y = 0; y < 16; ++y) {
    float even[32] = {}, odd[32] = {};
    for (int u = 0; u < 32; u += 2) {
      const float ce = t.c[u][y], co = t.c[u + 1][y];
      for (int x = 0; x < 32; ++x) {
        even[x] += ce * in[u][x];
        odd[x] += co * in[u + 1][x];
      }
    }
    for (int x = 0; x < 32; ++x) {
      out[x][y] = even[x] + odd[x];
      out[x][31 - y] = even[x] - odd[x];
    }
  }
}

}  // namespace

void dct32(const uint8_t* gray, float* out) {
  float in[32][32], mid[32][32];
  for (int y = 0; y < 32; ++y)
    for (int x = 0; x < 32; ++x) in[y][x] = gray[32 * y + x];
  dct_pass(in, mid);  // mid[x][u]
  dct_pass(mid, reinterpret_cast<float(*)[32]>(out));  // out[u][v]
}

void idct32(const float* coef, float* out) {
  float mid[32][32];
  idct_pass(reinterpret_cast<const float(*)[32]>(coef), mid);  // mid[v][y]
  idct_pass(mid, reinterpret_cast<float(*)[32]>(out));         // out[y][x]
}

void turn_coefficients(const float* src, float* dst, int t) {
  const bool transpose = t & 4;
  for (int u = 0; u < 32; ++u)
    for (int v = 0; v < 32; ++v) {
      const float c = transpose ? src[32 * v + u] : src[32 * u + v];
      dst[32 * u + v] = turn_negates(t, u, v) ? -c : c;
    }
}

void apply_dihedral(const uint8_t* src, uint8_t* dst, int n, int t) {
  bool transpose = t & 4, flip_rows = t & 2, flip_cols = t & 1;
  for (int y = 0; y < n; ++y)
    for (int x = 0; x < n; ++x) {
      // dst(y, x) = transformed(src): undo the flips, then the transpose.
      int sy = flip_rows ? n - 1 - y : y;
      int sx = flip_cols ? n - 1 - x : x;
      dst[y * n + x] = transpose ? src[sx * n + sy] : src[sy * n + sx];
    }
}

void turn_thumbnail(const Thumbnail& src, Thumbnail& dst, int t) {
  apply_dihedral(src.data(), dst.data(), kThumbSide, t);
  apply_dihedral(src.data() + kGrayBytes, dst.data() + kGrayBytes, kThumbSide, t);
  apply_dihedral(src.data() + kGrayBytes + kChromaPlane, dst.data() + kGrayBytes + kChromaPlane, kThumbSide, t);
}

Lookalike lookalike_features(const cv::Mat& reduced) {
  Lookalike f;
  cv::Mat t32 = hash_thumbnail(reduced);
  f.phash = dct_hashes(t32);
  for (int y = 0; y < 32; ++y) std::copy(t32.ptr<uint8_t>(y), t32.ptr<uint8_t>(y) + 32, f.thumb.begin() + y * 32);
  // Chroma at 32x32, reduced as the gray plane is; a gray image's is neutral.
  uint8_t* cb = f.thumb.data() + kGrayBytes;
  uint8_t* cr = cb + kChromaPlane;
  if (reduced.channels() == 1) {
    std::fill(cb, cb + 2 * kChromaPlane, uint8_t{128});
  } else {
    cv::Mat bgr = reduced, ycc, small;
    if (reduced.channels() == 4) cv::cvtColor(reduced, bgr, cv::COLOR_BGRA2BGR);
    cv::cvtColor(bgr, ycc, cv::COLOR_BGR2YCrCb);
    const bool shrink = ycc.cols >= kThumbSide && ycc.rows >= kThumbSide;
    cv::resize(ycc, small, cv::Size(kThumbSide, kThumbSide), 0, 0, shrink ? cv::INTER_AREA : cv::INTER_LINEAR);
    for (int y = 0; y < kThumbSide; ++y) {
      const cv::Vec3b* row = small.ptr<cv::Vec3b>(y);
      for (int x = 0; x < kThumbSide; ++x) {
        cr[y * kThumbSide + x] = row[x][1];
        cb[y * kThumbSide + x] = row[x][2];
      }
    }
  }
  return f;
}

ThumbStats thumb_stats(const Thumbnail& thumb) {
  ThumbStats s;
  for (size_t i = 0; i < kGrayBytes; ++i) {
    const uint8_t v = thumb[i];
    s.sum += v;
    s.sum_sq += uint32_t{v} * v;
  }
  return s;
}

double thumb_correlation(const Thumbnail& ta, const ThumbStats& sa, const Thumbnail& b, const ThumbStats& sb) {
  constexpr double kN = 1024;
  uint32_t dot = 0;  // at most 1024 * 255 * 255 < 2^32
  for (int i = 0; i < 1024; ++i) dot += uint32_t{ta[i]} * b[i];
  const double ma = sa.sum / kN, mb = sb.sum / kN;
  const double saa = double(sa.sum_sq) - kN * ma * ma, sbb = double(sb.sum_sq) - kN * mb * mb;
  const double sda = thumb_sd(sa), sdb = thumb_sd(sb);
  if (sda < kFlatSd && sdb < kFlatSd) return std::abs(ma - mb) <= 4.0 ? 1.0 : 0.0;
  if (sda < kFlatSd || sdb < kFlatSd) return 0.0;
  return (double(dot) - kN * ma * mb) / std::sqrt(saa * sbb);
}

bool thumb_is_flat(const ThumbStats& s) { return thumb_sd(s) < kFlatSd; }

double thumb_correlation(const Thumbnail& a, int t, const Thumbnail& b) {
  Thumbnail ta;
  turn_thumbnail(a, ta, t);
  return thumb_correlation(ta, thumb_stats(a), b, thumb_stats(b));
}

}  // namespace tamis
