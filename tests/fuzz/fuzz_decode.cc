// libFuzzer target: probe then decode (decode.h decode_image: libjpeg-turbo with
// the reduced-size path and its fallback, the direct PNG reader and its inflate,
// the GIF reader, OpenCV for the rest) on any bytes, with a pixel budget small
// enough for the fuzzer's memory limit. Inputs of odd length take the large-image
// paths (block reduction, the streamed PNG reader) from 4,096 pixels up. A decoded
// image must have the size the reduced path promises.
#include <cstdint>
#include <cstdlib>
#include <span>

#include "tamis/read/decode/decode.h"
#include "tamis/read/probe.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  const std::span<const uint8_t> bytes(data, size);
  const tamis::ProbeOutcome o = tamis::probe_bytes(bytes);
  if (o.defect != tamis::Defect::none) return 0;
  tamis::DecodeLimits limits;
  limits.max_pixels = 4'000'000;
  limits.max_image_bytes = uint64_t{256} << 20;
  if (size % 2 == 1) limits.block_above_pixels = 4096;
  const tamis::Decoded d = tamis::decode_image(bytes, o.info, limits);
  if (d.defect == tamis::Defect::none && d.reduced.empty()) std::abort();
  return 0;
}
