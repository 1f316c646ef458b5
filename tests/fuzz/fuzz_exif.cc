// libFuzzer target: the EXIF reader (exif.h read_exif) on any TIFF-structured bytes.
#include <cstdint>
#include <span>

#include "tamis/read/exif.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  (void)tamis::read_exif(std::span<const uint8_t>(data, size));
  return 0;
}
