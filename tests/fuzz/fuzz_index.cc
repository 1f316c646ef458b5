// libFuzzer target: the saved-index reader (index_file.h load_index, what `tamis
// split` reads): any bytes either give an index or throw std::runtime_error.
#include <cstdint>
#include <stdexcept>

#include "fuzz_support.h"
#include "tamis/report/index_file.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  tamis::fuzz::InputFile f(data, size);
  if (!f.ok()) return 0;
  try {
    (void)tamis::load_index(f.path());
  } catch (const std::runtime_error&) {
  }
  return 0;
}
