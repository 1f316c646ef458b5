// The project's own seeded generator: SplitMix64 (Steele, Lea & Flood, "Fast
// splittable pseudorandom number generators", OOPSLA 2014; the constants of
// Vigna's public-domain splitmix64.c). Identical output on every platform and
// library version, which std::mt19937 + std::uniform_int_distribution and
// std::shuffle do not promise. Not thread-safe: one generator per use.
#pragma once

#include <cstdint>
#include <string_view>
#include <utility>
#include <vector>

namespace tamis {

class SplitMix64 {
 public:
  explicit SplitMix64(uint64_t seed) : state_(seed) {}
  uint64_t next() {
    uint64_t z = (state_ += 0x9e3779b97f4a7c15ULL);
    z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ULL;
    z = (z ^ (z >> 27)) * 0x94d049bb133111ebULL;
    return z ^ (z >> 31);
  }
  // Uniform in [0, bound), bound > 0, without modulo bias (rejection sampling).
  uint64_t below(uint64_t bound) {
    uint64_t limit = UINT64_MAX - UINT64_MAX % bound;
    uint64_t x;
    do {
      x = next();
    } while (x >= limit);
    return x % bound;
  }

 private:
  uint64_t state_;
};

// Durstenfeld's in-place random shuffle (Knuth's Algorithm P) driven by SplitMix64.
template <typename T>
void seeded_shuffle(std::vector<T>& v, SplitMix64& rng) {
  for (size_t i = v.size(); i > 1; --i) {
    size_t j = static_cast<size_t>(rng.below(i));
    std::swap(v[i - 1], v[j]);
  }
}

// 64-bit FNV-1a of a byte string: a fixed, documented way to turn a label or a
// key into a number for seeding.
inline uint64_t fnv1a64(std::string_view s) {
  uint64_t h = 0xcbf29ce484222325ULL;
  for (unsigned char c : s) {
    h ^= c;
    h *= 0x100000001b3ULL;
  }
  return h;
}

}  // namespace tamis
