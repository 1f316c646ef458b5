#include "tamis/lookalike_index.h"

#include <algorithm>
#include <cmath>
#include <memory>
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
    t.codes.resize(codes_.size());
    t.occupied.assign(((size_t{1} << t.bits) + 63) / 64, 0);
    std::vector<uint32_t> fill(t.offsets.begin(), t.offsets.end() - 1);
    for (uint32_t i = 0; i < codes_.size(); ++i) {
      uint32_t key = t.key(codes_[i]);
      uint32_t at = fill[key]++;
      t.ids[at] = i;
      t.codes[at] = codes_[i];
      t.occupied[key >> 6] |= uint64_t{1} << (key & 63);
    }
  }
}

void LookalikeIndex::query(uint64_t q, int radius, std::vector<uint32_t>& out) const {
  if (radius > radius_) throw std::invalid_argument("query radius exceeds the index's build radius");
  const int m = static_cast<int>(tables_.size());
  const int sub_r = radius / m;
  for (int k = 0; k < m; ++k) {
    const Table& t = tables_[static_cast<size_t>(k)];
    for_each_within(t.key(q), t.bits, sub_r, [&](uint32_t key) {
      if (!((t.occupied[key >> 6] >> (key & 63)) & 1)) return;
      for (uint32_t p = t.offsets[key]; p < t.offsets[key + 1]; ++p) {
        uint64_t c = t.codes[p];
        if (hamming(c, q) > radius) continue;
        uint32_t j = t.ids[p];
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

namespace {

uint64_t binomial_ball(int bits, int k) {  // number of bit strings within distance k
  uint64_t total = 0, c = 1;
  for (int i = 0; i <= k && i <= bits; ++i) {
    total += c;
    c = c * static_cast<uint64_t>(bits - i) / static_cast<uint64_t>(i + 1);
  }
  return total;
}

struct JoinPlan {
  int m = 1;
  std::vector<int> bits;  // width of each substring
};

// Picks the table count with the least estimated work (entries to sort plus
// expected comparisons) among layouts whose substrings are at most 30 bits wide
// and whose entries fit in memory. `na`, `nb`: sizes of the two sides (equal
// and `self` for a self-join).
JoinPlan plan_join(size_t na, size_t nb, bool self, int radius) {
  JoinPlan best;
  double best_cost = -1;
  for (int m = 1; m <= 64; ++m) {
    if ((64 + m - 1) / m > 30) continue;  // keys must fit the entry's 32-bit key field
    int s = radius / m;
    int ra = (s + 1) / 2, rb = s / 2;
    bool one_side = self && ra == rb;
    double cost = 0;
    bool fits = true;
    std::vector<int> widths;
    for (int k = 0; k < m; ++k) {
      int w = 64 / m + (k < 64 % m ? 1 : 0);
      widths.push_back(w);
      double ea = double(na) * double(binomial_ball(w, ra)), eb = double(nb) * double(binomial_ball(w, rb));
      double entries = one_side ? ea : ea + eb;
      if (entries > double(1u << 30)) fits = false;
      double buckets = std::ldexp(1.0, w);
      double compares = one_side ? ea * ea / (2 * buckets) : ea * eb / buckets;
      cost += 4.0 * entries + compares;
    }
    if (!fits) continue;
    if (best_cost < 0 || cost < best_cost) {
      best_cost = cost;
      best.m = m;
      best.bits = widths;
    }
  }
  if (best_cost < 0) throw std::invalid_argument("Hamming join: no table layout fits in memory");
  return best;
}

// LSD radix sort of (key << 32 | tagged id) entries on the key's `bits` bits,
// 11 bits a pass, through `tmp` (same length); the result ends in `v`.
void radix_sort_by_key(uint64_t*& v, uint64_t*& tmp, size_t n, int bits) {
  for (int shift = 32; shift < 32 + bits; shift += 11) {
    size_t count[2049] = {0};
    for (size_t i = 0; i < n; ++i) ++count[((v[i] >> shift) & 2047) + 1];
    for (int i = 1; i <= 2048; ++i) count[i] += count[i - 1];
    for (size_t i = 0; i < n; ++i) tmp[count[(v[i] >> shift) & 2047]++] = v[i];
    std::swap(v, tmp);
  }
}

// The lowest `k` set bits of x.
inline uint64_t low_bits(uint64_t x, int k) {
  uint64_t out = 0;
  for (int i = 0; i < k && x; ++i) {
    uint64_t bit = x & (~x + 1);
    out |= bit;
    x ^= bit;
  }
  return out;
}

constexpr uint64_t kIdMask = 0x7fffffffu;
constexpr uint64_t kSideB = 0x80000000u;

// The join behind pairs_within and join_within. `b` == nullptr: self-join of `a`,
// pairs (i, j) with i < j. Otherwise pairs (i in a, j in b). Sorted and unique.
std::vector<std::pair<uint32_t, uint32_t>> hamming_join(const std::vector<uint64_t>& a,
                                                        const std::vector<uint64_t>* b, int radius,
                                                        unsigned threads) {
  if (radius < 0 || radius > 32) throw std::invalid_argument("Hamming join radius must be in [0, 32]");
  const bool self = b == nullptr;
  const std::vector<uint64_t>& bb = self ? a : *b;
  if (a.size() > kIdMask || bb.size() > kIdMask) throw std::invalid_argument("Hamming join holds fewer than 2^31 codes a side");
  JoinPlan plan = plan_join(a.size(), bb.size(), self, radius);
  const int s = radius / plan.m;
  const int ra = (s + 1) / 2, rb = s / 2;
  const bool one_side = self && ra == rb;
  std::vector<std::pair<uint32_t, uint32_t>> found;
  // One set of buffers for every table (no zero-filling: every slot is written first).
  size_t most = 0;
  for (int w : plan.bits)
    most = std::max<size_t>(most, a.size() * binomial_ball(w, ra) + (one_side ? 0 : bb.size() * binomial_ball(w, rb)));
  std::unique_ptr<uint64_t[]> buf_a(new uint64_t[most]), buf_b(new uint64_t[most]), buf_codes(new uint64_t[most]);
  int shift = 0;
  for (int k = 0; k < plan.m; ++k) {
    const int w = plan.bits[static_cast<size_t>(k)];
    const uint64_t mask = (uint64_t{1} << w) - 1;
    // Entry: key in the high 32 bits, id in bits 0..30, bit 31 set for side b.
    uint64_t* entries = buf_a.get();
    uint64_t* tmp = buf_b.get();
    size_t count = 0;
    for (uint32_t i = 0; i < a.size(); ++i) {
      uint32_t key = static_cast<uint32_t>((a[i] >> shift) & mask);
      for_each_within(key, w, ra, [&](uint32_t v) { entries[count++] = (uint64_t{v} << 32) | i; });
    }
    if (!one_side)
      for (uint32_t i = 0; i < bb.size(); ++i) {
        uint32_t key = static_cast<uint32_t>((bb[i] >> shift) & mask);
        for_each_within(key, w, rb, [&](uint32_t v) { entries[count++] = (uint64_t{v} << 32) | i | kSideB; });
      }
    radix_sort_by_key(entries, tmp, count, w);
    // Codes in entry order, so the comparisons below read memory sequentially.
    uint64_t* entry_codes = buf_codes.get();
    for (size_t p = 0; p < count; ++p) entry_codes[p] = (entries[p] & kSideB ? bb : a)[entries[p] & kIdMask];
    // Runs of one key hold the codes that may be within the radius; chunks for the
    // threads are cut at run boundaries.
    const size_t per_chunk = 1 << 16;
    std::vector<size_t> cuts{0};
    for (size_t p = per_chunk; p < count; p += per_chunk) {
      size_t q = std::max(p, cuts.back());
      while (q < count && (entries[q] >> 32) == (entries[q - 1] >> 32)) ++q;
      if (q > cuts.back() && q < count) cuts.push_back(q);
    }
    cuts.push_back(count);
    std::vector<std::vector<std::pair<uint32_t, uint32_t>>> parts(cuts.size() - 1);
    // Each pair is reported once: only from the first table where its substrings
    // are within s, and there only in its canonical bucket: the a-side key with
    // the lowest min(d, ra) differing bits flipped (the rest flipped on side b).
    int table_shift[64];
    {
      int sh = 0;
      for (int e = 0; e < plan.m; ++e) {
        table_shift[e] = sh;
        sh += plan.bits[static_cast<size_t>(e)];
      }
    }
    auto first_meeting = [&](uint64_t code_a, uint64_t code_b, uint64_t key) {
      for (int e = 0; e < k; ++e) {
        const uint64_t me = (uint64_t{1} << plan.bits[static_cast<size_t>(e)]) - 1;
        if (__builtin_popcountll(((code_a ^ code_b) >> table_shift[e]) & me) <= s) return false;
      }
      const uint64_t d = ((code_a ^ code_b) >> shift) & mask;
      return ((((code_a >> shift) & mask) ^ low_bits(d, ra)) == key);
    };
    parallel_for(parts.size(), threads, [&](size_t c) {
      auto& out = parts[c];
      for (size_t begin = cuts[c], stop = cuts[c + 1]; begin < stop;) {
        const uint64_t key = entries[begin] >> 32;
        size_t end = begin;
        while (end < stop && (entries[end] >> 32) == key) ++end;
        if (one_side) {
          for (size_t x = begin; x < end; ++x) {
            const uint64_t cx = entry_codes[x];
            const uint32_t ix = static_cast<uint32_t>(entries[x] & kIdMask);
            for (size_t y = x + 1; y < end; ++y) {
              if (hamming(cx, entry_codes[y]) > radius) continue;
              const uint32_t iy = static_cast<uint32_t>(entries[y] & kIdMask);
              if (ix == iy) continue;
              // side a of a self-join pair is its smaller id
              const bool x_first = ix < iy;
              if (!first_meeting(x_first ? cx : entry_codes[y], x_first ? entry_codes[y] : cx, key)) continue;
              out.emplace_back(std::min(ix, iy), std::max(ix, iy));
            }
          }
        } else {
          // The sort is stable and side a was entered first: a run is [a..., b...].
          size_t mid = begin;
          while (mid < end && !(entries[mid] & kSideB)) ++mid;
          for (size_t x = begin; x < mid; ++x) {
            const uint64_t cx = entry_codes[x];
            const uint32_t ia = static_cast<uint32_t>(entries[x] & kIdMask);
            for (size_t y = mid; y < end; ++y) {
              if (hamming(cx, entry_codes[y]) > radius) continue;
              const uint32_t ib = static_cast<uint32_t>(entries[y] & kIdMask);
              if (!first_meeting(cx, entry_codes[y], key)) continue;
              if (!self) {
                out.emplace_back(ia, ib);
              } else if (ia != ib) {
                out.emplace_back(std::min(ia, ib), std::max(ia, ib));
              }
            }
          }
        }
        begin = end;
      }
    }, 1);
    for (auto& p : parts) found.insert(found.end(), p.begin(), p.end());
    shift += w;
  }
  std::sort(found.begin(), found.end());
  found.erase(std::unique(found.begin(), found.end()), found.end());
  return found;
}

}  // namespace

std::vector<std::pair<uint32_t, uint32_t>> pairs_within(const std::vector<uint64_t>& codes, int radius,
                                                        unsigned threads) {
  return hamming_join(codes, nullptr, radius, threads);
}

std::vector<std::pair<uint32_t, uint32_t>> join_within(const std::vector<uint64_t>& a, const std::vector<uint64_t>& b,
                                                       int radius, unsigned threads) {
  return hamming_join(a, &b, radius, threads);
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
