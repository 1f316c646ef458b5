// One image's memory (decode.h): large PNGs decoded a row at a time give what
// libpng gives, and files over the memory budget are refused, not read.
//
// Reference: libpng (Debian libpng16, through OpenCV's imdecode) decodes each
// test PNG in full; its pixels, reduced by the rule decode.h states, must equal
// the streamed path's result byte for byte, with the same distinct-value count
// and least alpha. The PNGs are written here (zlib, the five filter types of
// ISO/IEC 15948 clause 9 in turn), and once by libpng's own writer. libjpeg-turbo
// enforces the budget on a progressive JPEG's coefficient arrays itself
// (max_memory_to_use); the test checks that it refuses one over the budget and
// reads the same file under a larger one, and that a baseline JPEG of the same
// size needs no such arrays.
#include <catch2/catch.hpp>

#include <zlib.h>

#include <cstring>
#include <string>
#include <vector>

#include <opencv2/imgcodecs.hpp>
#include <opencv2/imgproc.hpp>

#include "tamis/base/random.h"
#include "tamis/read/decode/decode.h"
#include "tamis/read/probe.h"

using namespace tamis;

namespace {

void put32(std::vector<uint8_t>& v, uint32_t x) {
  for (int s = 24; s >= 0; s -= 8) v.push_back(static_cast<uint8_t>(x >> s));
}

void chunk(std::vector<uint8_t>& png, const char* type, const std::vector<uint8_t>& data) {
  put32(png, static_cast<uint32_t>(data.size()));
  const size_t start = png.size();
  png.insert(png.end(), type, type + 4);
  png.insert(png.end(), data.begin(), data.end());
  put32(png, static_cast<uint32_t>(crc32(0, png.data() + start, static_cast<uInt>(png.size() - start))));
}

uint8_t paeth(int a, int b, int c) {
  const int p = a + b - c, pa = std::abs(p - a), pb = std::abs(p - b), pc = std::abs(p - c);
  return static_cast<uint8_t>(pa <= pb && pa <= pc ? a : pb <= pc ? b : c);
}

// A PNG of raw (big-endian) rows, row y filtered with type y % 5, the data in
// `idat_parts` IDAT chunks.
std::vector<uint8_t> write_png(uint32_t w, uint32_t h, int colour_type, int depth, const std::vector<uint8_t>& raw,
                               int idat_parts = 1) {
  const int ch = colour_type == 0 ? 1 : colour_type == 4 ? 2 : colour_type == 2 ? 3 : 4;
  const size_t bpp = size_t(ch) * depth / 8, stride = size_t{w} * bpp;
  std::vector<uint8_t> filtered;
  filtered.reserve(h * (stride + 1));
  for (uint32_t y = 0; y < h; ++y) {
    const uint8_t type = static_cast<uint8_t>(y % 5);
    const uint8_t* row = raw.data() + y * stride;
    const uint8_t* up = y > 0 ? row - stride : nullptr;
    filtered.push_back(type);
    for (size_t i = 0; i < stride; ++i) {
      const int a = i >= bpp ? row[i - bpp] : 0, b = up ? up[i] : 0, c = (up && i >= bpp) ? up[i - bpp] : 0;
      const int pred = type == 0 ? 0 : type == 1 ? a : type == 2 ? b : type == 3 ? (a + b) / 2 : paeth(a, b, c);
      filtered.push_back(static_cast<uint8_t>(row[i] - pred));
    }
  }
  uLongf n = compressBound(static_cast<uLong>(filtered.size()));
  std::vector<uint8_t> z(n);
  REQUIRE(compress2(z.data(), &n, filtered.data(), static_cast<uLong>(filtered.size()), 1) == Z_OK);
  z.resize(n);
  std::vector<uint8_t> png{0x89, 'P', 'N', 'G', '\r', '\n', 0x1a, '\n'};
  std::vector<uint8_t> ihdr;
  put32(ihdr, w);
  put32(ihdr, h);
  ihdr.insert(ihdr.end(), {static_cast<uint8_t>(depth), static_cast<uint8_t>(colour_type), 0, 0, 0});
  chunk(png, "IHDR", ihdr);
  const size_t part = (z.size() + idat_parts - 1) / idat_parts;
  for (size_t off = 0; off < z.size(); off += part)
    chunk(png, "IDAT", std::vector<uint8_t>(z.begin() + off, z.begin() + std::min(z.size(), off + part)));
  chunk(png, "IEND", {});
  return png;
}

// Smooth shapes plus noise, so both the block means and the filters see varied data.
// colour_bits (16-bit pictures): the colour samples use only that many bits.
std::vector<uint8_t> picture(uint32_t w, uint32_t h, int samples, int depth, uint64_t seed, int levels = 0,
                             int colour_bits = 16) {
  SplitMix64 rng(seed);
  const int bytes = depth / 8;
  std::vector<uint8_t> raw(size_t{w} * h * samples * bytes);
  size_t i = 0;
  for (uint32_t y = 0; y < h; ++y)
    for (uint32_t x = 0; x < w; ++x)
      for (int c = 0; c < samples; ++c) {
        uint32_t v = (x * (c + 3) / 7 + y * (5 - c) / 11 + ((x / 97 + y / 89) % 3) * 40) & 0xffff;
        if (levels > 0) {
          v = ((x / 500 + y / 300 + c) % levels) * 60;
        } else {
          v = depth == 8 ? (v + rng.below(24)) & 0xff : (v * 251 + rng.below(4000)) & 0xffff;
          if (depth == 16) v &= (1u << colour_bits) - 1;
          if (c == samples - 1 && (samples == 2 || samples == 4)) v = depth == 8 ? 128 + (x + y) % 128 : 30000 + y;
        }
        if (bytes == 2) raw[i++] = static_cast<uint8_t>(v >> 8);
        raw[i++] = static_cast<uint8_t>(v);
      }
  return raw;
}

Decoded decode(const std::vector<uint8_t>& bytes, bool stream, uint64_t budget = uint64_t{1} << 30,
               uint64_t block_above = DecodeLimits{}.block_above_pixels) {
  const ProbeOutcome p = probe_bytes(bytes);
  REQUIRE(p.defect == Defect::none);
  DecodeLimits limits;
  limits.block_above_pixels = block_above;
  limits.stream_large_png = stream;
  limits.max_image_bytes = budget;
  return decode_image(bytes, p.info, limits);
}

void require_same(const Decoded& a, const Decoded& b) {
  REQUIRE(a.defect == Defect::none);
  REQUIRE(b.defect == Defect::none);
  REQUIRE(a.reduced.size() == b.reduced.size());
  REQUIRE(a.reduced.type() == b.reduced.type());
  CHECK(cv::norm(a.reduced, b.reduced, cv::NORM_INF) == 0);
  CHECK(a.distinct == b.distinct);
  CHECK(a.alpha_min == b.alpha_min);
}

}  // namespace

TEST_CASE("a large PNG decoded row by row equals libpng's decode, reduced by the same rule", "[decode][memory]") {
  struct Case {
    const char* name;
    int colour_type, depth, samples, levels, parts;
    uint32_t w, h;
    int colour_bits = 16;
  };
  // The threshold lowered to 100,000 pixels (the paths are the same at 2^24;
  // the libpng-written case below is at full size), in shapes whose sides are
  // not multiples of the block side; the last is too narrow for blocks (k = 1).
  const Case cases[] = {
      {"grey 8", 0, 8, 1, 0, 1, 803, 601},          {"grey+alpha 8", 4, 8, 2, 0, 3, 1201, 563},
      {"RGB 8", 2, 8, 3, 0, 2, 779, 779},           {"RGBA 8", 6, 8, 4, 0, 1, 581, 1163},
      {"RGB 16", 2, 16, 3, 0, 1, 1101, 1100},       {"grey+alpha 16", 4, 16, 2, 0, 1, 700, 703},
      {"RGBA 16", 6, 16, 4, 0, 2, 640, 777},        {"grey 16", 0, 16, 1, 0, 4, 3000, 300},
      {"few grey levels (a mask)", 0, 8, 1, 3, 1, 1500, 1200},
      // 16-bit colour of fewer bits (a 12-bit camera, 8-bit values kept in 16 bits).
      {"grey 16 of 12 bits", 0, 16, 1, 0, 2, 1100, 900, 12}, {"RGBA 16 of 8 bits", 6, 16, 4, 0, 1, 700, 640, 8},
  };
  for (const Case& c : cases) {
    INFO(c.name);
    const auto raw = picture(c.w, c.h, c.samples, c.depth, c.w * 31 + c.h, c.levels, c.colour_bits);
    const auto png = write_png(c.w, c.h, c.colour_type, c.depth, raw, c.parts);
    const Decoded streamed = decode(png, true, uint64_t{1} << 30, 100'000);
    const Decoded full = decode(png, false, uint64_t{1} << 30, 100'000);
    require_same(streamed, full);
    CHECK(std::min(streamed.reduced.cols, streamed.reduced.rows) <= 256);
    if (c.levels > 0) CHECK(streamed.distinct == c.levels);
  }
}

TEST_CASE("a large PNG from libpng's own writer, and damaged ones, decode as libpng decodes them", "[decode][memory]") {
  cv::Mat m(4200, 4100, CV_8UC3);  // above 2^24 pixels: the real threshold
  cv::randu(m, 0, 255);
  cv::GaussianBlur(m, m, cv::Size(0, 0), 3);  // libpng's filter heuristics then pick a mix of filters
  std::vector<uint8_t> png;
  REQUIRE(cv::imencode(".png", m, png));
  require_same(decode(png, true), decode(png, false));
  // The same file cut inside its data: both paths call it damaged (the probe
  // first: an IDAT that runs past the end).
  std::vector<uint8_t> cut(png.begin(), png.begin() + png.size() / 2);
  const ProbeOutcome p = probe_bytes(cut);
  CHECK(p.defect != Defect::none);
}

TEST_CASE("a large PNG whose data is short or runs on gets the verdict libpng gives", "[decode][memory]") {
  // Chunk CRCs right (the probe passes), the zlib stream holding 40 rows fewer
  // than the header claims, or 3 rows more: the streamed path declines, and the
  // file gets libpng's verdict on either path (the threshold lowered to 100,000
  // pixels).
  const uint32_t w = 700, h = 400;
  const auto raw = picture(w, h, 3, 8, 11);
  auto claim_height = [](std::vector<uint8_t> png, uint32_t height) {
    for (int i = 0; i < 4; ++i) png[20 + i] = static_cast<uint8_t>(height >> (24 - 8 * i));  // IHDR height
    const uLong crc = crc32(0, png.data() + 12, 17);                                        // type + fields
    for (int i = 0; i < 4; ++i) png[29 + i] = static_cast<uint8_t>(crc >> (24 - 8 * i));
    return png;
  };
  const auto good = write_png(w, h, 2, 8, raw);
  for (const uint32_t claimed : {h + 40, h - 3}) {
    INFO("rows claimed " << claimed << " of " << h);
    const auto png = claim_height(good, claimed);
    const Decoded streamed = decode(png, true, uint64_t{1} << 30, 100'000);
    const Decoded full = decode(png, false, uint64_t{1} << 30, 100'000);
    CHECK(streamed.defect == full.defect);
    if (streamed.defect == Defect::none && full.defect == Defect::none)
      CHECK(cv::norm(streamed.reduced, full.reduced, cv::NORM_INF) == 0);
    if (claimed > h) CHECK(streamed.defect != Defect::none);  // rows missing: damaged
  }
}

TEST_CASE("files over the memory budget are refused, under it read", "[decode][memory]") {
  // Full decode (OpenCV's TIFF reader): 2600 x 2600 BGR needs 2 x 20 MB.
  cv::Mat m(2600, 2600, CV_8UC3, cv::Scalar(40, 90, 160));
  cv::circle(m, {1300, 1300}, 700, cv::Scalar(200, 30, 10), -1);
  std::vector<uint8_t> tiff;
  REQUIRE(cv::imencode(".tiff", m, tiff));
  CHECK(decode(tiff, true, uint64_t{16} << 20).defect == Defect::over_memory_budget);
  CHECK(decode(tiff, true, uint64_t{64} << 20).defect == Defect::none);
  {
    const ProbeOutcome p = probe_bytes(tiff);
    CHECK(decode_memory_estimate(p.info, DecodeLimits{}) >= uint64_t{2600} * 2600 * 3);
  }
  // A progressive JPEG keeps all its coefficients (about 20 MB here at 4:2:0):
  // libjpeg-turbo refuses it within 8 MB, reads it within 64 MB; the baseline
  // coding of the same picture decodes a few rows at a time within 8 MB.
  std::vector<uint8_t> progressive, baseline;
  REQUIRE(cv::imencode(".jpg", m, progressive, {cv::IMWRITE_JPEG_PROGRESSIVE, 1}));
  REQUIRE(cv::imencode(".jpg", m, baseline));
  CHECK(decode(progressive, true, uint64_t{8} << 20).defect == Defect::over_memory_budget);
  const Decoded prog = decode(progressive, true, uint64_t{64} << 20);
  CHECK(prog.defect == Defect::none);
  const Decoded base = decode(baseline, true, uint64_t{8} << 20);
  CHECK(base.defect == Defect::none);
  CHECK(base.reduced.size() == prog.reduced.size());
  // A streamed PNG needs a few rows whatever its size: 1,000,000 pixels RGBA
  // within 1 MB (the threshold lowered), where the full decode needs 8 MB.
  const auto raw = picture(1000, 1000, 4, 8, 7);
  const auto png = write_png(1000, 1000, 6, 8, raw);
  CHECK(decode(png, true, uint64_t{1} << 20, 100'000).defect == Defect::none);
  CHECK(decode(png, false, uint64_t{1} << 20, 100'000).defect == Defect::over_memory_budget);
}
