#include "tamis/base/simd.h"

#include <atomic>

namespace tamis {

namespace {

std::atomic<bool> g_allowed{true};

#if defined(__x86_64__)
bool cpu_popcount() {
  static const bool has = __builtin_cpu_supports("avx512f") && __builtin_cpu_supports("avx512vpopcntdq");
  return has;
}
#else
bool cpu_popcount() { return false; }
#endif

}  // namespace

bool wide_popcount_usable() { return cpu_popcount() && g_allowed.load(std::memory_order_relaxed); }
void allow_wide_paths(bool allowed) { g_allowed.store(allowed, std::memory_order_relaxed); }

}  // namespace tamis
