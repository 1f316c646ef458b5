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
  double mean = 0, sq = 0, entropy = 0;
  for (int v = 0; v < 256; ++v) {
    mean += v * double(hist[v]);
    sq += double(v) * v * double(hist[v]);
    if (hist[v]) {
      double p = hist[v] / n;
      entropy -= p * std::log2(p);
    }
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
  cv::Mat lap;
  cv::Laplacian(g, lap, CV_32F);
  cv::Scalar m, sd;
  cv::meanStdDev(lap, m, sd);
  st.focus = static_cast<float>(sd[0] * sd[0]);
  return st;
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

ThumbStats thumb_stats(const std::array<uint8_t, 1024>& t) {
  ThumbStats s;
  for (uint8_t v : t) {
    s.sum += v;
    s.sum_sq += uint64_t{v} * v;
  }
  return s;
}

double thumb_correlation(const std::array<uint8_t, 1024>& ta, const ThumbStats& sa, const std::array<uint8_t, 1024>& b,
                         const ThumbStats& sb) {
  constexpr double kN = 1024;
  uint32_t dot = 0;  // at most 1024 * 255 * 255 < 2^32
  for (int i = 0; i < 1024; ++i) dot += uint32_t{ta[i]} * b[i];
  const double ma = sa.sum / kN, mb = sb.sum / kN;
  const double saa = double(sa.sum_sq) - kN * ma * ma, sbb = double(sb.sum_sq) - kN * mb * mb;
  const double sda = std::sqrt(std::max(0.0, saa) / kN), sdb = std::sqrt(std::max(0.0, sbb) / kN);
  constexpr double kFlat = 2.0;
  if (sda < kFlat && sdb < kFlat) return std::abs(ma - mb) <= 4.0 ? 1.0 : 0.0;
  if (sda < kFlat || sdb < kFlat) return 0.0;
  return (double(dot) - kN * ma * mb) / std::sqrt(saa * sbb);
}

double thumb_correlation(const std::array<uint8_t, 1024>& a, int t, const std::array<uint8_t, 1024>& b) {
  std::array<uint8_t, 1024> ta;
  apply_dihedral(a.data(), ta.data(), 32, t);
  return thumb_correlation(ta, thumb_stats(a), b, thumb_stats(b));
}

}  // namespace tamis
