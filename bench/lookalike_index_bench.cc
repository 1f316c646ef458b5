// Benchmark: all pairs within Hamming radius 8 among 1,000,000 64-bit codes
// (uniform, plus planted pairs at every distance 0..8), with pairs_within (the sorted
// multi-index self-join) on one thread against brute force on one thread, on the same codes in the same run.
// Checks that both return the same pairs. docs/performance.md records the figures.
//
// Usage: lookalike_index_bench [N=1000000] [RADIUS=8] [BRUTE_ROWS=N]
//   BRUTE_ROWS < N times brute force on the first BRUTE_ROWS rows only (each row
//   compared with all later codes) and scales the time by the share of pairs done;
//   pairs are then compared on those rows.
#include <chrono>
#include <cstdio>
#include <cstdlib>

#include "tamis/base/random.h"
#include "tamis/relate/lookalike_index.h"

using namespace tamis;
using Clock = std::chrono::steady_clock;

int main(int argc, char** argv) {
  size_t n = argc > 1 ? std::strtoull(argv[1], nullptr, 10) : 1000000;
  int r = argc > 2 ? std::atoi(argv[2]) : 8;
  size_t brute_rows = argc > 3 ? std::strtoull(argv[3], nullptr, 10) : n;
  SplitMix64 rng(2026);
  std::vector<uint64_t> codes;
  const size_t planted = 1000;
  for (size_t i = 0; i + 2 * planted * (r + 1) < n; ++i) codes.push_back(rng.next());
  for (int d = 0; d <= r; ++d)
    for (size_t k = 0; k < planted; ++k) {
      uint64_t a = rng.next(), b = a;
      for (int f = 0; f < d;) {
        uint64_t bit = uint64_t{1} << rng.below(64);
        if ((a ^ b) & bit) continue;
        b ^= bit;
        ++f;
      }
      codes.push_back(a);
      codes.push_back(b);
    }
  seeded_shuffle(codes, rng);
  n = codes.size();

  auto t0 = Clock::now();
  auto fast = pairs_within(codes, r, 1);
  double t_index = std::chrono::duration<double>(Clock::now() - t0).count();
  std::printf("index: %zu codes, radius %d, %zu pairs, %.3f s on 1 thread\n", n, r, fast.size(), t_index);

  brute_rows = std::min(brute_rows, n);
  t0 = Clock::now();
  std::vector<std::pair<uint32_t, uint32_t>> slow;
  for (size_t i = 0; i < brute_rows; ++i) {
    const uint64_t a = codes[i];
    for (size_t j = i + 1; j < n; ++j)
      if (hamming(a, codes[j]) <= r) slow.emplace_back(uint32_t(i), uint32_t(j));
  }
  double t_brute = std::chrono::duration<double>(Clock::now() - t0).count();
  double done = 0;  // share of all pairs the brute-force rows covered
  for (size_t i = 0; i < brute_rows; ++i) done += double(n - 1 - i);
  double share = done / (double(n) * double(n - 1) / 2);
  double t_brute_full = t_brute / share;
  std::vector<std::pair<uint32_t, uint32_t>> fast_rows;
  for (auto p : fast)
    if (p.first < brute_rows) fast_rows.push_back(p);
  bool same = fast_rows == slow;
  std::printf("brute force: %zu rows (%.2f%% of all pairs), %zu pairs, %.3f s; full all-pairs time %s%.1f s\n",
              brute_rows, 100 * share, slow.size(), t_brute, share < 1 ? "(scaled) " : "", t_brute_full);
  std::printf("same pairs: %s\n", same ? "yes" : "NO");
  std::printf("speed-up: %.0fx\n", t_brute_full / t_index);
  return same ? 0 : 1;
}
