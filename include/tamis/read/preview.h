// Previews: a picture of a file at a size a person can look at (the report's
// groups, flagged images and masks), decoded again from the file when the
// report is written. Read-only; never writes anything.
//
// Contract: preview_image(file, side, max_bytes, limits) reads the file as the
// read stage does (file_bytes.h: a regular file of at most max_bytes, never
// through a link, never blocking), decodes it through decode_image (decode.h:
// the same decoders and pixel and memory limits, the same alpha rule: a
// transparent picture as it looks laid over white, or black where white would
// hide it) at a reduced size, and area-reduces it so that its longer side is at
// most `side` (never enlarged). The result is 8-bit BGR, as stored (EXIF
// orientation not applied, as the look-alike thumbnails), or empty when the
// file cannot be read or decoded now (moved, changed, damaged): the caller then
// falls back to the stored thumbnail. Never throws. Deterministic: a pure
// function of the file's bytes.
#pragma once

#include <cstdint>
#include <filesystem>

#include <opencv2/core.hpp>

#include "tamis/read/decode/decode.h"

namespace tamis {

cv::Mat preview_image(const std::filesystem::path& file, uint32_t side, uint64_t max_bytes, const DecodeLimits& limits);

}  // namespace tamis
