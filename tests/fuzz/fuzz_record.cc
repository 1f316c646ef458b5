// libFuzzer target: the cache's record row decoder (record_codec.h
// record_from_bytes). A row that decodes must encode back to the same bytes.
#include <cstdint>
#include <cstdlib>
#include <cstring>
#include <span>
#include <vector>

#include "tamis/model/record_codec.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  tamis::FileRecord r;
  if (!tamis::detail::record_from_bytes(std::span<const uint8_t>(data, size), r)) return 0;
  std::vector<uint8_t> again;
  tamis::detail::record_to_bytes(r, again);
  if (again.size() != size || std::memcmp(again.data(), data, size) != 0) std::abort();
  return 0;
}
