// Pieces the decode paths share (decode.cc, png_direct.cc); not part of the
// interface. The reduction rule they implement is stated in decode.h.
#pragma once

#include <algorithm>
#include <cstdint>
#include <vector>

#include <opencv2/core.hpp>

#include "tamis/read/decode/decode.h"

namespace tamis::detail {

// Decodes estimated above this many bytes run one at a time in the process, so
// that the threads together hold at most one image's budget plus this much a thread.
inline constexpr uint64_t kSharedDecodeBytes = uint64_t{64} << 20;

// The block side for a w x h image: the largest k whose blocks keep the shorter
// side at 2 * side or more (at least 1).
inline uint32_t box_factor(uint64_t w, uint64_t h, uint32_t side) {
  const uint64_t k = std::min(w, h) / (2 * uint64_t{std::max<uint32_t>(side, 1)});
  return static_cast<uint32_t>(std::clamp<uint64_t>(k, 1, UINT32_MAX));
}

// Distinct pixel values (all channels of a pixel together), counted up to `cap`
// (at most 255), fed a row at a time in raster order. Masks and label maps have a
// handful; photographs have thousands.
class DistinctCounter {
 public:
  explicit DistinctCounter(int cap) : cap_(cap) { std::fill(std::begin(slots_), std::end(slots_), kEmpty); }
  bool full() const { return count_ >= cap_; }
  int count() const { return std::min(count_, cap_); }
  void add(const uint8_t* p, size_t pixels, int ch) {
    if (ch == 1) {  // a bit per grey level
      for (size_t x = 0; x < pixels && !full(); ++x) {
        const uint64_t bit = uint64_t{1} << (p[x] & 63);
        uint64_t& word = grey_[p[x] >> 6];
        if (word & bit) continue;
        word |= bit;
        ++count_;
      }
      return;
    }
    // Colours: an open-addressing set of 512 slots (cap is at most 255, so a free
    // slot always remains). Opaque white in BGRA packs to the empty marker, so that
    // one colour is tracked apart.
    for (size_t x = 0; x < pixels && !full(); ++x, p += ch) {
      uint32_t v = 0;
      for (int c = 0; c < ch; ++c) v = (v << 8) | p[c];
      if (have_last_ && v == last_) continue;
      last_ = v;
      have_last_ = true;
      if (v == kEmpty) {
        if (seen_empty_value_) continue;
        seen_empty_value_ = true;
      } else {
        uint32_t h = (v * 0x9e3779b1u) >> 23;  // 9 bits
        while (slots_[h] != kEmpty && slots_[h] != v) h = (h + 1) & 511;
        if (slots_[h] == v) continue;
        slots_[h] = v;
      }
      ++count_;
    }
  }

 private:
  static constexpr uint32_t kEmpty = UINT32_MAX;
  int cap_;
  int count_ = 0;
  uint64_t grey_[4] = {0, 0, 0, 0};
  uint32_t slots_[512];
  bool seen_empty_value_ = false;
  uint32_t last_ = kEmpty;
  bool have_last_ = false;
};

// Means of whole k x k blocks (integer sums, rounded half up), fed the rows of a
// w x h image of `ch` 8-bit channels in order; the result is floor(w/k) x
// floor(h/k) (the last w mod k columns and h mod k rows are left out, as the
// JPEG path leaves out partial blocks). Memory: one row of sums and the result.
class BoxReducer {
 public:
  BoxReducer(uint32_t w, uint32_t h, int ch, uint32_t k)
      : ch_(ch), k_(k), out_w_(w / k), out_h_(h / k), sums_(size_t{out_w_} * ch, 0) {
    out_.create(static_cast<int>(out_h_), static_cast<int>(out_w_), CV_8UC(ch));
  }
  void add_row(const uint8_t* row) {
    const uint32_t y = row_++;
    if (y / k_ >= out_h_) return;
    for (size_t bx = 0, x = 0; bx < out_w_; ++bx) {
      uint64_t* s = &sums_[bx * ch_];
      for (uint32_t i = 0; i < k_; ++i, ++x)
        for (int c = 0; c < ch_; ++c) s[c] += row[x * ch_ + c];
    }
    if ((y + 1) % k_ != 0) return;
    const uint64_t n = uint64_t{k_} * k_;
    uint8_t* d = out_.ptr<uint8_t>(static_cast<int>(y / k_));
    for (size_t i = 0; i < sums_.size(); ++i) {
      d[i] = static_cast<uint8_t>((sums_[i] + n / 2) / n);
      sums_[i] = 0;
    }
  }
  cv::Mat take() { return out_; }
  // Bytes held: the sums and the result.
  static uint64_t bytes(uint64_t w, uint64_t h, int ch, uint32_t k) {
    return (w / k) * ch * 8 + (w / k) * (h / k) * ch;
  }

 private:
  int ch_;
  uint32_t k_, out_w_, out_h_;
  uint32_t row_ = 0;
  std::vector<uint64_t> sums_;
  cv::Mat out_;
};

// Deep samples at 8 bits (docs/decoding.md, Deep samples): v against `top`,
// the largest value the format gives a sample: 65535 for 16-bit PNG and TIFF
// (as the PNG specification, Pillow, OpenCV and TensorFlow's loaders take them:
// a picture that uses only the low bits is dark for them, and for tamis), a PNM's
// maxval. Against 65535: (v + 128) / 257, which is OpenCV's rounding of v / 257
// for every v (257 is odd, so v / 257 never ends in exactly .5); else
// round(v 255 / top) half up.
inline uint8_t deep_to_8(uint32_t v, uint32_t top) {
  if (top == 65535) return static_cast<uint8_t>((v + 128) / 257);
  if (top == 0) return 0;
  return static_cast<uint8_t>((std::min(v, top) * 255 + top / 2) / top);
}

// Transparency (docs/decoding.md): an image with alpha is judged as it looks
// laid over a plain ground, never by the colours its transparent pixels happen
// to store. Its colour is premultiplied by alpha at full resolution, row by row
// (an opaque pixel is left as it is), so that every reduction averages what is
// seen and the streamed and whole-image paths agree; the reduced image is then
// laid over the ground by flatten_alpha. Returns the row's least alpha (the
// `alpha_min` of Decoded), found in the same pass; `premultiply` false (colour
// that the decoder already premultiplied) only finds it.
inline uint8_t premultiply_row(uint8_t* row, size_t pixels, int ch, bool premultiply = true) {
  uint8_t least = 255;
  for (size_t x = 0; x < pixels; ++x, row += ch) {
    const unsigned a = row[ch - 1];
    if (a == 255) continue;
    least = std::min<uint8_t>(least, static_cast<uint8_t>(a));
    if (premultiply)
      for (int c = 0; c < ch - 1; ++c) row[c] = static_cast<uint8_t>((row[c] * a + 127) / 255);
  }
  return least;
}
// A premultiplied 2- or 4-channel image (grey+alpha, BGRA) laid over white, or
// over black when white would hide what it shows: when its grey levels over
// white spread less than kHiddenOnWhite while over black they spread at least
// kShownOnBlack (a white drawing on a transparent ground). 1 or 3 channels.
inline constexpr double kHiddenOnWhite = 4.0, kShownOnBlack = 8.0;
cv::Mat flatten_alpha(const cv::Mat& premultiplied);

// The area resize every decode ends with: to a shorter side of `side`, unless
// the image is already at most twice that (then unchanged).
cv::Mat area_reduce(const cv::Mat& m, uint32_t side);

// The streamed PNG path for images of more than DecodeLimits::block_above_pixels: 8 or 16 bits a
// sample, grey, grey+alpha, RGB or RGBA, not interlaced, no tRNS chunk. The rows
// are inflated (zlib) and unfiltered one at a time, turned into what OpenCV's
// libpng path gives (8 bits: 16-bit samples rounded as OpenCV's conversion does;
// BGR(A), grey+alpha as BGRA), counted (distinct values, least alpha) and reduced
// by blocks, so the full image is never held. Fills `out` and returns true, or
// declines (false, `out` unspecified) for any other layout or anything odd about
// the data; libpng then decides.
bool decode_png_streamed(std::span<const uint8_t> bytes, const ProbeInfo& probe, uint32_t side, Decoded& out);
// The memory that path holds for this header (rows, sums, the block-reduced
// image); 0 when the path does not take the file.
uint64_t png_streamed_bytes(const ProbeInfo& probe, uint32_t side);

}  // namespace tamis::detail
