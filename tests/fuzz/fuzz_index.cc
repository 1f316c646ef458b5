// libFuzzer target: the saved-index reader (index_file.h load_index, what `tamis
// split` reads): any bytes either give an index or throw std::runtime_error.
// The index's checksum would turn away almost every mutated input, so the target
// writes the right one into each input that has the checksum's key first (a
// forged file: anyone can compute XXH3), and the decoder behind it is fuzzed.
#include <cstdint>
#include <cstring>
#include <stdexcept>
#include <vector>

#include <xxhash.h>

#include "fuzz_support.h"
#include "tamis/report/index_file.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  std::vector<uint8_t> b(data, data + size);
  // index_file.cc: byte 0 the map's head, 1..11 the key "_checksum" and a uint64
  // head, 12..19 XXH3-64 (big-endian) of bytes 20.. seeded with byte 0.
  static const uint8_t kKey[] = {0x69, '_', 'c', 'h', 'e', 'c', 'k', 's', 'u', 'm', 0x1b};
  if (b.size() >= 20 && std::memcmp(b.data() + 1, kKey, sizeof kKey) == 0) {
    const uint64_t h = XXH3_64bits_withSeed(b.data() + 20, b.size() - 20, b[0]);
    for (int k = 0; k < 8; ++k) b[12 + static_cast<size_t>(k)] = static_cast<uint8_t>(h >> (56 - 8 * k));
  }
  tamis::fuzz::InputFile f(b.data(), b.size());
  if (!f.ok()) return 0;
  try {
    (void)tamis::load_index(f.path());
  } catch (const std::runtime_error&) {
  }
  return 0;
}
