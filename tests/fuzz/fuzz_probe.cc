// libFuzzer target: the header parsers (probe.h probe_bytes) on any bytes. They
// must never read out of bounds or crash, and a probe that succeeds must claim
// sane dimensions.
#include <cstdint>
#include <cstdlib>
#include <span>

#include "tamis/read/probe.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  const tamis::ProbeOutcome o = tamis::probe_bytes(std::span<const uint8_t>(data, size));
  if (o.defect == tamis::Defect::none && o.info.format != tamis::Format::unknown && o.info.frames == 0) std::abort();
  return 0;
}
