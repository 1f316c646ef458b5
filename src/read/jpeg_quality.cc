#include "tamis/read/jpeg_quality.h"

#include <algorithm>
#include <array>
#include <cstdlib>

namespace tamis {

namespace {

// ITU-T T.81 Annex K, Table K.1 (luminance), natural order.
constexpr int kLumaTable[64] = {16, 11, 10, 16, 24,  40,  51,  61,  12, 12, 14, 19, 26,  58,  60,  55,
                                14, 13, 16, 24, 40,  57,  69,  56,  14, 17, 22, 29, 51,  87,  80,  62,
                                18, 22, 37, 56, 68,  109, 103, 77,  24, 35, 55, 64, 81,  104, 113, 92,
                                49, 64, 78, 87, 103, 121, 120, 101, 72, 92, 95, 98, 112, 100, 103, 99};

}  // namespace

const uint8_t kZigzagToNatural[64] = {0,  1,  8,  16, 9,  2,  3,  10, 17, 24, 32, 25, 18, 11, 4,  5,
                                      12, 19, 26, 33, 40, 48, 41, 34, 27, 20, 13, 6,  7,  14, 21, 28,
                                      35, 42, 49, 56, 57, 50, 43, 36, 29, 22, 15, 23, 30, 37, 44, 51,
                                      58, 59, 52, 45, 38, 31, 39, 46, 53, 60, 61, 54, 47, 55, 62, 63};

int ijg_luma_step(int quality, int k) {
  quality = std::clamp(quality, 1, 100);
  // jpeg_quality_scaling() and jpeg_add_quant_table() of the IJG library.
  const int scale = quality < 50 ? 5000 / quality : 200 - 2 * quality;
  return std::clamp((kLumaTable[k] * scale + 50) / 100, 1, 255);
}

uint8_t jpeg_quality_of_table(const uint16_t* table) {
  // Every quality's table, made once.
  static const std::array<std::array<uint16_t, 64>, 101> tables = [] {
    std::array<std::array<uint16_t, 64>, 101> t{};
    for (int q = 1; q <= 100; ++q)
      for (int k = 0; k < 64; ++k) t[size_t(q)][size_t(k)] = static_cast<uint16_t>(ijg_luma_step(q, k));
    return t;
  }();
  int best = 1;
  long best_distance = -1;
  for (int q = 1; q <= 100; ++q) {
    long d = 0;
    for (size_t k = 0; k < 64; ++k) d += std::labs(long(tables[size_t(q)][k]) - long(table[k]));
    if (best_distance < 0 || d <= best_distance) best = q, best_distance = d;
  }
  return static_cast<uint8_t>(best);
}

}  // namespace tamis
