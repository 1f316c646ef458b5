// libFuzzer target: the policy reader (policy.h parse_policy): any text either
// gives a policy or throws std::runtime_error (a message for exit 2).
#include <cstdint>
#include <stdexcept>
#include <string>

#include "tamis/place/policy.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  try {
    (void)tamis::parse_policy(std::string(reinterpret_cast<const char*>(data), size));
  } catch (const std::runtime_error&) {
  }
  return 0;
}
