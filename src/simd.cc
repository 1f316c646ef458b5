#include "tamis/simd.h"

#include <atomic>

namespace tamis {

namespace {

std::atomic<bool> g_allowed{true};

#if defined(__x86_64__)
bool cpu_popcount() {
  static const bool has = __builtin_cpu_supports("avx512f") && __builtin_cpu_supports("avx512vpopcntdq");
  return has;
}
bool cpu_bytes() {
  static const bool has = __builtin_cpu_supports("avx512f") && __builtin_cpu_supports("avx512bw") &&
                          __builtin_cpu_supports("avx512vbmi");
  return has;
}
#else
bool cpu_popcount() { return false; }
bool cpu_bytes() { return false; }
#endif

}  // namespace

bool wide_popcount_usable() { return cpu_popcount() && g_allowed.load(std::memory_order_relaxed); }
bool wide_bytes_usable() { return cpu_bytes() && g_allowed.load(std::memory_order_relaxed); }
void allow_wide_paths(bool allowed) { g_allowed.store(allowed, std::memory_order_relaxed); }

}  // namespace tamis
