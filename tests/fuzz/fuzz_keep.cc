// libFuzzer target: the --keep manifest reader, the manifest's path column and
// the rows `tamis export` reads (manifest_reader.h): any bytes either give a
// result or throw std::runtime_error.
#include <cstdint>
#include <sstream>
#include <stdexcept>
#include <string>

#include "tamis/place/manifest_reader.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  const std::string text(reinterpret_cast<const char*>(data), size);
  try {
    std::istringstream is(text);
    (void)tamis::read_manifest_splits(is);
  } catch (const std::runtime_error&) {
  }
  try {
    std::istringstream is(text);
    (void)tamis::read_manifest_paths(is);
  } catch (const std::runtime_error&) {
  }
  try {  // `tamis export`'s reader
    std::istringstream is(text);
    (void)tamis::read_manifest_rows(is);
  } catch (const std::runtime_error&) {
  }
  return 0;
}
