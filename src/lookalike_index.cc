#include "tamis/lookalike_index.h"

#include <algorithm>
#include <cmath>
#include <stdexcept>

#include "tamis/parallel.h"

namespace tamis {

namespace {

// Calls fn(v) for every `bits`-bit value v within Hamming distance `r` of `key`.
template <typename Fn>
void for_each_within(uint32_t key, int bits, int r, Fn&& fn) {
  fn(key);
  if (r <= 0) return;
  // Flip combinations of 1..r distinct bit positions, positions in increasing order.
  int pos[32];
  for (int k = 1; k <= r && k <= bits; ++k) {
    for (int i = 0; i < k; ++i) pos[i] = i;
    while (true) {
      uint32_t v = key;
      for (int i = 0; i < k; ++i) v ^= 1u << pos[i];
      fn(v);
      int i = k - 1;
      while (i >= 0 && pos[i] == bits - k + i) --i;
      if (i < 0) break;
      ++pos[i];
      for (int j = i + 1; j < k; ++j) pos[j] = pos[j - 1] + 1;
    }
  }
}

}  // namespace

LookalikeIndex::LookalikeIndex(std::vector<uint64_t> codes, int radius, int m) : codes_(std::move(codes)), radius_(radius) {
  if (codes_.size() > UINT32_MAX - 1) throw std::invalid_argument("LookalikeIndex holds at most 2^32-2 codes");
  if (radius < 0 || radius > 32) throw std::invalid_argument("LookalikeIndex radius must be in [0, 32]");
  if (m <= 0) {
    double lg = std::log2(std::max<double>(2.0, static_cast<double>(codes_.size())));
    m = static_cast<int>(std::lround(64.0 / std::clamp(lg, 8.0, 24.0)));
    m = std::clamp(m, 1, radius + 1);  // more than r+1 tables adds nothing
    // Substrings wider than 24 bits would need huge tables.
    while (64 / m > 24) ++m;
  }
  m = std::clamp(m, 1, 64);
  tables_.resize(static_cast<size_t>(m));
  int shift = 0;
  for (int k = 0; k < m; ++k) {
    Table& t = tables_[static_cast<size_t>(k)];
    t.bits = 64 / m + (k < 64 % m ? 1 : 0);
    t.shift = shift;
    shift += t.bits;
    t.offsets.assign((size_t{1} << t.bits) + 1, 0);
    for (uint64_t c : codes_) ++t.offsets[t.key(c) + 1];
    for (size_t b = 1; b < t.offsets.size(); ++b) t.offsets[b] += t.offsets[b - 1];
    t.ids.resize(codes_.size());
    std::vector<uint32_t> fill(t.offsets.begin(), t.offsets.end() - 1);
    for (uint32_t i = 0; i < codes_.size(); ++i) t.ids[fill[t.key(codes_[i])]++] = i;
  }
}

void LookalikeIndex::query(uint64_t q, int radius, std::vector<uint32_t>& out) const {
  if (radius > radius_) throw std::invalid_argument("query radius exceeds the index's build radius");
  const int m = static_cast<int>(tables_.size());
  const int sub_r = radius / m;
  for (int k = 0; k < m; ++k) {
    const Table& t = tables_[static_cast<size_t>(k)];
    for_each_within(t.key(q), t.bits, sub_r, [&](uint32_t key) {
      for (uint32_t p = t.offsets[key]; p < t.offsets[key + 1]; ++p) {
        uint32_t j = t.ids[p];
        uint64_t c = codes_[j];
        if (hamming(c, q) > radius) continue;
        // Report j only from the first table where it is within sub_r, so each id once.
        bool earlier = false;
        for (int e = 0; e < k && !earlier; ++e) {
          const Table& te = tables_[static_cast<size_t>(e)];
          earlier = __builtin_popcount(te.key(c) ^ te.key(q)) <= sub_r;
        }
        if (!earlier) out.push_back(j);
      }
    });
  }
}

std::vector<std::pair<uint32_t, uint32_t>> pairs_within(const std::vector<uint64_t>& codes, int radius,
                                                        unsigned threads) {
  LookalikeIndex index(codes, radius);
  unsigned n_threads = resolve_threads(threads);
  const size_t n = codes.size();
  const size_t chunk = 4096;
  const size_t n_chunks = (n + chunk - 1) / chunk;
  std::vector<std::vector<std::pair<uint32_t, uint32_t>>> per_chunk(n_chunks);
  parallel_for(n_chunks, n_threads, [&](size_t c) {
    std::vector<uint32_t> hits;
    auto& out = per_chunk[c];
    for (size_t i = c * chunk; i < std::min(n, (c + 1) * chunk); ++i) {
      hits.clear();
      index.query(codes[i], radius, hits);
      for (uint32_t j : hits)
        if (j > i) out.emplace_back(static_cast<uint32_t>(i), j);
    }
    std::sort(out.begin(), out.end());
  }, 1);
  std::vector<std::pair<uint32_t, uint32_t>> all;
  size_t total = 0;
  for (const auto& v : per_chunk) total += v.size();
  all.reserve(total);
  for (auto& v : per_chunk) all.insert(all.end(), v.begin(), v.end());  // chunks are in i order
  return all;
}

std::vector<std::pair<uint32_t, uint32_t>> pairs_within_brute_force(const std::vector<uint64_t>& codes, int radius) {
  std::vector<std::pair<uint32_t, uint32_t>> out;
  const size_t n = codes.size();
  for (size_t i = 0; i < n; ++i) {
    const uint64_t a = codes[i];
    for (size_t j = i + 1; j < n; ++j)
      if (hamming(a, codes[j]) <= radius) out.emplace_back(static_cast<uint32_t>(i), static_cast<uint32_t>(j));
  }
  return out;
}

}  // namespace tamis
