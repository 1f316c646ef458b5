// libFuzzer target: the scale-out readers (read/part_file.h PartFile, a scan's
// part; relate/join_file.h load_join, a join task's output). The checksums would
// turn away almost every mutated input before a value is decoded, so the target
// writes the right checksums into the input first (a forged file): then the
// decoders behind them are what is fuzzed. Any bytes either give a part (whose
// records and thumbnails then read back or throw) or throw PartError /
// JoinFileError.
#include <cstdint>
#include <cstring>
#include <stdexcept>
#include <vector>

#include <xxhash.h>

#include "fuzz_support.h"
#include "tamis/read/part_file.h"
#include "tamis/relate/join_file.h"

namespace {

uint64_t get_u64(const uint8_t* p) {
  uint64_t v = 0;
  for (int k = 7; k >= 0; --k) v = v << 8 | p[k];
  return v;
}
void put_u64(uint8_t* p, uint64_t v) {
  for (int k = 0; k < 8; ++k) p[k] = static_cast<uint8_t>(v >> (8 * k));
}

// The part's two checksums and end mark, where its header says they go.
void forge_part(std::vector<uint8_t>& b) {
  if (b.size() < 88) return;
  const uint64_t meta = get_u64(b.data() + 24), recs = get_u64(b.data() + 40), thumbs = get_u64(b.data() + 48);
  if (meta > b.size() || recs > b.size() || thumbs > b.size() / 1168) return;
  const uint64_t thumbs_at = 64 + meta + recs + 16 * thumbs;
  if (thumbs_at > b.size() - 24) return;
  uint8_t* trailer = b.data() + b.size() - 24;
  put_u64(trailer, XXH3_64bits(b.data(), thumbs_at));
  put_u64(trailer + 8, XXH3_64bits(b.data(), b.size() - 24));
  std::memcpy(trailer + 16, "tamisend", 8);
}

}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  std::vector<uint8_t> b(data, data + size);
  const bool join = size >= 24 && std::memcmp(data + 1, "tamis-join", 10) == 0;
  if (join) {
    put_u64(b.data() + 16, XXH3_64bits(b.data() + 24, b.size() - 24));
  } else {
    forge_part(b);
  }
  tamis::fuzz::InputFile f(b.data(), b.size());
  if (!f.ok()) return 0;
  try {
    if (join) {
      (void)tamis::load_join(f.path());
      return 0;
    }
    tamis::PartFile part(f.path());
    (void)part.read_records();
    std::vector<tamis::Thumbnail> t(std::min<size_t>(part.thumbnails(), 64));
    if (!t.empty()) part.read_thumbnails(0, t.size(), t.data());
    part.verify();
  } catch (const tamis::PartError&) {
  } catch (const tamis::JoinFileError&) {
  }
  return 0;
}
