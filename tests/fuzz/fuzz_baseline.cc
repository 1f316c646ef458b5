// libFuzzer target: the baseline reader (baseline.h load_baseline, a report.json
// of an earlier run): any bytes either give a baseline or throw std::runtime_error.
#include <cstdint>
#include <stdexcept>

#include "fuzz_support.h"
#include "tamis/place/baseline.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  tamis::fuzz::InputFile f(data, size);
  if (!f.ok()) return 0;
  try {
    (void)tamis::load_baseline(f.path());
  } catch (const std::runtime_error&) {
  }
  return 0;
}
