#include "tamis/features.h"

#include <algorithm>
#include <cmath>

#include <opencv2/imgproc.hpp>

namespace tamis {

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

std::array<uint64_t, kDihedralCount> dct_hashes(const cv::Mat& thumb32) {
  CV_Assert(thumb32.rows == 32 && thumb32.cols == 32 && thumb32.type() == CV_8UC1);
  cv::Mat f, d;
  thumb32.convertTo(f, CV_64F);
  cv::dct(f, d);  // orthonormal DCT-II (OpenCV's scaling equals scipy's norm='ortho')
  double block[8][8];
  for (int u = 0; u < 8; ++u)
    for (int v = 0; v < 8; ++v) block[u][v] = d.at<double>(u, v);
  std::array<uint64_t, kDihedralCount> out{};
  for (int t = 0; t < kDihedralCount; ++t) {
    bool transpose = t & 4, flip_rows = t & 2, flip_cols = t & 1;
    double c[64];
    for (int u = 0; u < 8; ++u)
      for (int v = 0; v < 8; ++v) {
        double x = transpose ? block[v][u] : block[u][v];
        if (flip_rows && (u & 1)) x = -x;
        if (flip_cols && (v & 1)) x = -x;
        c[u * 8 + v] = x;
      }
    double sorted[64];
    std::copy(c, c + 64, sorted);
    std::nth_element(sorted, sorted + 31, sorted + 64);
    double lo = sorted[31];
    double hi = *std::min_element(sorted + 32, sorted + 64);
    double median = 0.5 * (lo + hi);
    uint64_t code = 0;
    for (int k = 0; k < 64; ++k)
      if (c[k] > median) code |= uint64_t{1} << (63 - k);
    out[t] = code;
  }
  return out;
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

Lookalike lookalike_features(const cv::Mat& reduced) {
  Lookalike f;
  cv::Mat t32 = hash_thumbnail(reduced);
  f.phash = dct_hashes(t32);
  for (int y = 0; y < 32; ++y) std::copy(t32.ptr<uint8_t>(y), t32.ptr<uint8_t>(y) + 32, f.thumb.begin() + y * 32);
  return f;
}

double thumb_correlation(const std::array<uint8_t, 1024>& a, int t, const std::array<uint8_t, 1024>& b) {
  constexpr int kN = 1024;
  std::array<uint8_t, kN> ta;
  apply_dihedral(a.data(), ta.data(), 32, t);
  double ma = 0, mb = 0;
  for (int i = 0; i < kN; ++i) {
    ma += ta[i];
    mb += b[i];
  }
  ma /= kN;
  mb /= kN;
  double sab = 0, saa = 0, sbb = 0;
  for (int i = 0; i < kN; ++i) {
    double x = ta[i] - ma, y = b[i] - mb;
    sab += x * y;
    saa += x * x;
    sbb += y * y;
  }
  double sda = std::sqrt(saa / kN), sdb = std::sqrt(sbb / kN);
  constexpr double kFlat = 2.0;
  if (sda < kFlat && sdb < kFlat) return std::abs(ma - mb) <= 4.0 ? 1.0 : 0.0;
  if (sda < kFlat || sdb < kFlat) return 0.0;
  return sab / std::sqrt(saa * sbb);
}

}  // namespace tamis
