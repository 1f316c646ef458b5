// Decoding: turn a file's bytes into pixels, or say why that cannot be done.
//
// JPEG is decoded with libjpeg-turbo at the smallest DCT scale whose shorter
// side still reaches `DecodeLimits::reduced_side` (or 1/1 for small images),
// with decoder warnings treated as corruption: a damaged JPEG is reported,
// never passed on as a grey-filled picture. GIF (first frame) is decoded by
// tamis's own LZW decoder (this OpenCV has none); the common PNG by a direct
// path (zlib and the PNG row filters, decode_png_direct below), which gives
// libpng's pixels and leaves every other PNG to libpng. Other formats go through
// OpenCV's imdecode at full size and are then reduced with area averaging.
//
// The pixel limit is checked from the probed header before any decoding.
// The result is 8 bits per sample, 1 (gray), 3 (BGR) or 4 (BGRA) channels.
// Pure function of its inputs; thread-safe (no shared state but a zlib stream a thread).
#pragma once

#include <cstdint>
#include <span>

#include <opencv2/core.hpp>

#include "tamis/record.h"

namespace tamis {

struct DecodeLimits {
  uint64_t max_pixels = 200'000'000;  // width * height claimed by the header
  uint32_t reduced_side = 128;        // shorter side wanted in the reduced image
};

struct Decoded {
  Defect defect = Defect::none;
  cv::Mat reduced;  // 8-bit; shorter side >= reduced_side unless the image is smaller
  uint8_t alpha_min = 255;  // smallest alpha value at full resolution (255 without alpha)
  uint8_t distinct = 65;    // distinct pixel values (colours) at full resolution, up to 65; JPEG: 65
};

Decoded decode_image(std::span<const uint8_t> bytes, const ProbeInfo& probe, const DecodeLimits& limits);

// The direct PNG path decode_image takes first: a PNG of 8 bits a sample, grey,
// RGB or RGBA, not interlaced, without a tRNS chunk, whose IDAT data inflate to
// exactly its rows with valid filters, is decoded here into `out` (1, 3 (BGR) or
// 4 (BGRA) channels, as OpenCV gives it) and true is returned. Otherwise false,
// `out` unspecified, and libpng (through OpenCV) decides. Expects a probe that
// found no defect (chunk CRCs checked).
bool decode_png_direct(std::span<const uint8_t> bytes, const ProbeInfo& probe, cv::Mat& out);

// Decodes the first frame of a GIF to BGR (transparent pixels take their palette
// colour). Returns an empty Mat and sets `defect` when the data is damaged.
cv::Mat decode_gif_first_frame(std::span<const uint8_t> bytes, Defect& defect);

}  // namespace tamis
