// libFuzzer target: tamis's own inflate (inflate.h inflate_small). The first two
// bytes give the output size (up to 65,535); the rest is the zlib stream. When it
// succeeds, zlib's own inflate (the reference) must give the same bytes.
#include <zlib.h>

#include <cstdint>
#include <cstdlib>
#include <cstring>
#include <span>
#include <vector>

#include "tamis/read/decode/inflate.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  if (size < 2) return 0;
  const size_t out_size = size_t{data[0]} << 8 | data[1];
  std::vector<uint8_t> out(out_size + 1);
  const std::span<const uint8_t> in(data + 2, size - 2);
  if (!tamis::inflate_small(in, out.data(), out_size)) return 0;
  std::vector<uint8_t> ref(out_size + 1);
  uLongf got = static_cast<uLongf>(ref.size());
  const int z = uncompress(ref.data(), &got, in.data(), static_cast<uLong>(in.size()));
  // inflate.h: true only for a complete stream of exactly out_size bytes, the
  // bytes zlib gives.
  if (z != Z_OK || got != out_size || std::memcmp(ref.data(), out.data(), out_size) != 0) std::abort();
  return 0;
}
