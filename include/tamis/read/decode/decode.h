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
// Reduction: an image of more than 2^24 pixels (block_above_pixels) is first reduced by whole k x k
// blocks (integer means; k the largest that keeps the shorter side at 2 *
// reduced_side or more; the last partial blocks left out), then every image is
// area-resized (OpenCV INTER_AREA) to a shorter side of reduced_side unless it is
// already at most twice that. Every decoder path applies the same rule.
//
// Memory (docs/decoding.md): the pixel limit is checked from the probed header
// before any decoding, then the memory budget `max_image_bytes`. Large PNGs (8
// or 16 bits, grey, grey+alpha, RGB or RGBA, not interlaced) are decoded a row
// at a time into the block reduction, so they need a few rows and the reduced
// image whatever their size; JPEGs are decoded at a reduced DCT scale, and
// libjpeg holds its own arrays (a progressive JPEG's coefficients) to the
// budget; every other file is decoded in full, and refused (over_memory_budget)
// when its estimate is over the budget. Decodes estimated above 64 MB run one at
// a time in the process, so the threads together hold at most one budget plus
// 64 MB a thread.
//
// The result is 8 bits per sample, 1 (gray), 3 (BGR) or 4 (BGRA) channels.
// Pure function of its inputs (the one-at-a-time lock changes no result);
// thread-safe (no shared state but a zlib stream and a row buffer a thread).
#pragma once

#include <cstdint>
#include <span>

#include <opencv2/core.hpp>

#include "tamis/model/record.h"

namespace tamis {

// Bumped whenever decoding gives other pixels for some file (the reduction
// rule, a decoder path); the cache's settings key carries it, so records decoded
// by older rules are never reused. 2: block reduction above 2^24 pixels; 3:
// images with alpha judged as laid over a plain ground, GIF transparency read,
// 16-bit colour taken to 8 bits against the top of the bits it uses; 4: PNM
// samples taken to 8 bits against the file's maxval, a PAM's RGB read red first,
// and 16-bit PNG and TIFF colour against 65535 again (as loaders read it).
inline constexpr int kDecodeRules = 4;

struct DecodeLimits {
  uint64_t max_pixels = 200'000'000;        // width * height claimed by the header (--max-pixels)
  uint64_t max_image_bytes = uint64_t{1} << 30;  // memory one image's decode may hold (--image-memory-mb)
  uint32_t reduced_side = 128;              // shorter side wanted in the reduced image
  // Not user settings: the tests and the fuzzer lower the first to reach the
  // large-image paths with small files, and turn the second off to compare the
  // streamed PNG path with libpng's.
  uint64_t block_above_pixels = uint64_t{1} << 24;  // block reduction (and PNG streaming) above this
  bool stream_large_png = true;
};

// The memory decode_image holds for a file with this header, besides the file's
// bytes: pixel buffers and the reductions (JPEG: the scaled output, and a
// progressive file's coefficients at 4:4:4, an upper bound). An estimate that
// errs high; decode_image refuses a file whose estimate is over the budget,
// and libjpeg holds a JPEG to the budget itself.
uint64_t decode_memory_estimate(const ProbeInfo& probe, const DecodeLimits& limits);

struct Decoded {
  Defect defect = Defect::none;
  // 8-bit, 1 or 3 channels; shorter side >= reduced_side unless the image is
  // smaller. An image with alpha is given as it looks laid over white (over
  // black when white would hide it: decode_internal.h flatten_alpha), so its
  // look-alike features and quality statistics see what a viewer sees.
  cv::Mat reduced;
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

// Decodes the first frame of a GIF to BGR, or to BGRA when a graphic control
// extension before it names a transparent colour index: those pixels, and the
// screen the frame leaves uncovered, are then clear (alpha 0). Returns an empty
// Mat and sets `defect` when the data is damaged, or when the frame's own size
// (which may exceed the screen's) is over `limits`: too_many_pixels,
// over_memory_budget (its indices and the screen's image).
cv::Mat decode_gif_first_frame(std::span<const uint8_t> bytes, Defect& defect, const DecodeLimits& limits = {});

}  // namespace tamis
