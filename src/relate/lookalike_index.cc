#include "tamis/relate/lookalike_index.h"

#include <sys/mman.h>

#if defined(__x86_64__)
#include <immintrin.h>
#endif

#include <algorithm>
#include <array>
#include <cmath>
#include <memory>
#include <stdexcept>

#include "tamis/base/parallel.h"
#include "tamis/base/simd.h"

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
  int ra = 0, rb = 0;     // substring radius expanded on side a and on side b (ra + rb = radius / m)
};

// Picks the table count, and for a cross join how the substring radius s is
// shared between the sides, with the least estimated work (entries to sort plus
// expected comparisons) among layouts whose substrings are at most 30 bits wide
// and whose entries fit in memory. `na`, `nb`: sizes of the two sides (equal
// and `self` for a self-join, which shares s evenly). Expanding only the smaller
// side of a lopsided cross join (8 flips/turns against one identity code each)
// makes far fewer entries, and each pair then meets in one bucket only.
// An entry is generated twice, sorted and its code gathered: measured on the
// Fashion-MNIST join (8 x 70,000 codes against 70,000) it costs about as much as
// 16 code comparisons (the weight 4 used before chose 3 tables with both sides
// expanded, 1.1 s; this weight chooses 5 tables with only the identity side
// expanded, 0.7 s). Uniform codes of a million-code self-join keep 3 tables.
constexpr double kEntryCost = 16.0;

JoinPlan plan_join(size_t na, size_t nb, bool self, int radius) {
  JoinPlan best;
  double best_cost = -1;
  for (int m = 1; m <= 64; ++m) {
    if ((64 + m - 1) / m > 30) continue;  // keys must fit the entry's 32-bit key field
    const int s = radius / m;
    for (int ra = self ? (s + 1) / 2 : 0; ra <= (self ? (s + 1) / 2 : s); ++ra) {
      const int rb = s - ra;
      const bool one_side = self && ra == rb;
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
        cost += kEntryCost * entries + compares;
      }
      if (!fits) continue;
      if (best_cost < 0 || cost < best_cost) {
        best_cost = cost;
        best.m = m;
        best.bits = widths;
        best.ra = ra;
        best.rb = rb;
      }
    }
  }
  if (best_cost < 0) throw std::invalid_argument("Hamming join: no table layout fits in memory");
  return best;
}

// A large array of uint64 that the kernel may back with huge pages (fewer page
// faults when it is first written). Not zeroed.
class LargeBuffer {
 public:
  explicit LargeBuffer(size_t n) : bytes_(std::max<size_t>(n, 1) * sizeof(uint64_t)) {
    void* p = mmap(nullptr, bytes_, PROT_READ | PROT_WRITE, MAP_PRIVATE | MAP_ANONYMOUS, -1, 0);
    if (p == MAP_FAILED) throw std::bad_alloc();
    if (bytes_ >= (size_t{2} << 20)) madvise(p, bytes_, MADV_HUGEPAGE);  // advice only; may be ignored
    data_ = static_cast<uint64_t*>(p);
  }
  ~LargeBuffer() { munmap(data_, bytes_); }
  size_t size() const { return bytes_ / sizeof(uint64_t); }
  LargeBuffer(const LargeBuffer&) = delete;
  LargeBuffer& operator=(const LargeBuffer&) = delete;
  uint64_t* data() { return data_; }

 private:
  size_t bytes_;
  uint64_t* data_ = nullptr;
};

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

// A permutation of the 64 bit positions, applied a byte at a time. Permuting the
// bits of every code keeps every Hamming distance, so a join of permuted codes
// returns the same pairs.
class BitPermutation {
 public:
  // to[k]: where bit k goes.
  explicit BitPermutation(const std::array<int, 64>& to) {
    for (int byte = 0; byte < 8; ++byte)
      for (int v = 0; v < 256; ++v) {
        uint64_t m = 0;
        for (int b = 0; b < 8; ++b)
          if (v >> b & 1) m |= uint64_t{1} << to[static_cast<size_t>(byte * 8 + b)];
        table_[byte][v] = m;
      }
  }
  uint64_t operator()(uint64_t x) const {
    uint64_t out = 0;
    for (int byte = 0; byte < 8; ++byte) out |= table_[byte][(x >> (8 * byte)) & 255];
    return out;
  }

 private:
  uint64_t table_[8][256];
};

// Deals the bit positions to the substrings so that each substring gets an even
// share of the informative bits: codes of real images are far from uniform (a
// DCT hash's first bit is nearly always set, and neighbouring frequencies go
// together), and contiguous substrings would make a few buckets huge. Bits are
// ranked by how evenly they split the codes, then dealt to the substrings in turn.
std::array<int, 64> deal_bits(const std::vector<uint64_t>& a, const std::vector<uint64_t>& b,
                              const std::vector<int>& widths) {
  std::array<uint64_t, 64> ones{};
  const size_t step = std::max<size_t>(1, (a.size() + b.size()) / 65536);  // a sample suffices
  size_t seen = 0;
  for (const auto* side : {&a, &b})
    for (size_t i = 0; i < side->size(); i += step, ++seen)
      for (uint64_t x = (*side)[i]; x; x &= x - 1) ++ones[static_cast<size_t>(__builtin_ctzll(x))];
  std::array<int, 64> order;
  for (int k = 0; k < 64; ++k) order[static_cast<size_t>(k)] = k;
  auto imbalance = [&](int k) {
    double p = seen ? double(ones[static_cast<size_t>(k)]) / double(seen) : 0.5;
    return std::abs(p - 0.5);
  };
  std::stable_sort(order.begin(), order.end(), [&](int x, int y) { return imbalance(x) < imbalance(y); });
  // Substring k takes positions [start_k, start_k + widths[k]); deal round-robin.
  std::vector<int> start(widths.size()), filled(widths.size(), 0);
  for (size_t k = 1; k < widths.size(); ++k) start[k] = start[k - 1] + widths[k - 1];
  std::array<int, 64> to{};
  size_t table = 0;
  for (int rank = 0; rank < 64; ++rank) {
    while (filled[table] == widths[table]) table = (table + 1) % widths.size();
    to[static_cast<size_t>(order[static_cast<size_t>(rank)])] = start[table] + filled[table]++;
    table = (table + 1) % widths.size();
  }
  return to;
}

// Calls on_hit(y) for every y < ny with hamming(cx, ys[y]) <= r: the join's
// inner loop, one code against a run of codes.
template <typename OnHit>
void close_run_plain(uint64_t cx, const uint64_t* ys, size_t ny, int r, OnHit&& on_hit) {
  for (size_t y = 0; y < ny; ++y)
    if (__builtin_popcountll(cx ^ ys[y]) <= r) [[unlikely]] on_hit(y);
}

#if defined(__x86_64__)
#define TAMIS_WIDE_COMPARE 1
// The same with AVX-512's population count: eight distances an instruction.
// Exact integer arithmetic, so the hits are the same as the plain loop's.
template <typename OnHit>
__attribute__((target("avx512f,avx512vpopcntdq"))) void close_run_wide(uint64_t cx, const uint64_t* ys, size_t ny,
                                                                         int r, OnHit&& on_hit) {
  const __m512i vx = _mm512_set1_epi64(static_cast<long long>(cx));
  const __m512i lim = _mm512_set1_epi64(r);
  size_t y = 0;
  for (; y + 8 <= ny; y += 8) {
    const __m512i d = _mm512_popcnt_epi64(_mm512_xor_si512(vx, _mm512_loadu_si512(ys + y)));
    for (__mmask8 m = _mm512_cmple_epu64_mask(d, lim); m; m = static_cast<__mmask8>(m & (m - 1))) [[unlikely]]
      on_hit(y + static_cast<size_t>(__builtin_ctz(m)));
  }
  if (y < ny) {
    const __mmask8 tail = static_cast<__mmask8>((1u << (ny - y)) - 1);
    const __m512i d = _mm512_popcnt_epi64(_mm512_xor_si512(vx, _mm512_maskz_loadu_epi64(tail, ys + y)));
    for (__mmask8 m = _mm512_mask_cmple_epu64_mask(tail, d, lim); m; m = static_cast<__mmask8>(m & (m - 1)))
      on_hit(y + static_cast<size_t>(__builtin_ctz(m)));
  }
}
#endif

template <typename OnHit>
void close_run(uint64_t cx, const uint64_t* ys, size_t ny, int r, bool wide, OnHit&& on_hit) {
#ifdef TAMIS_WIDE_COMPARE
  if (wide) {
    close_run_wide(cx, ys, ny, r, on_hit);
    return;
  }
#endif
  (void)wide;
  close_run_plain(cx, ys, ny, r, on_hit);
}

// on_hit(x, y) for every x < nx, y < ny with hamming(xs[x], ys[y]) <= r; the
// longer side runs innermost.
template <typename OnHit>
void close_pairs(const uint64_t* xs, size_t nx, const uint64_t* ys, size_t ny, int r, bool wide, OnHit&& on_hit) {
  if (nx > ny) {
    for (size_t y = 0; y < ny; ++y) close_run(ys[y], xs, nx, r, wide, [&](size_t x) { on_hit(x, y); });
  } else {
    for (size_t x = 0; x < nx; ++x) close_run(xs[x], ys, ny, r, wide, [&](size_t y) { on_hit(x, y); });
  }
}

// on_hit(x, y) for every x < y < n with hamming(c[x], c[y]) <= r.
template <typename OnHit>
void close_pairs_within(const uint64_t* c, size_t n, int r, bool wide, OnHit&& on_hit) {
  for (size_t x = 0; x + 1 < n; ++x)
    close_run(c[x], c + x + 1, n - x - 1, r, wide, [&](size_t y) { on_hit(x, x + 1 + y); });
}

constexpr uint64_t kIdMask = 0x7fffffffu;
constexpr uint64_t kSideB = 0x80000000u;

// The join behind pairs_within and join_within, as a state and its phases:
// prepare (constructor: the plan, and the codes permuted so that each table's
// substring is a run of bits), then per table (run_table): the entries counted
// per generation chunk and bucket, and slices of whole buckets within the
// memory budget, each generated (fill_slice) and searched (search_buckets).
// `b` == nullptr: self-join of `a`, pairs (i, j) with i < j. Otherwise pairs
// (i in a, j in b). run() gives them sorted and unique.
class HammingJoin {
 public:
  HammingJoin(const std::vector<uint64_t>& a_in, const std::vector<uint64_t>* b_in, int radius, unsigned threads,
              const PairFilter& keep, size_t max_entries)
      : radius_(radius), threads_(threads), keep_(keep), max_entries_(max_entries), self_(b_in == nullptr) {
    if (radius < 0 || radius > 32) throw std::invalid_argument("Hamming join radius must be in [0, 32]");
    if (a_in.size() > kIdMask || (b_in && b_in->size() > kIdMask))
      throw std::invalid_argument("Hamming join holds fewer than 2^31 codes a side");
    plan_ = plan_join(a_in.size(), self_ ? a_in.size() : b_in->size(), self_, radius);
    const BitPermutation permute(deal_bits(a_in, self_ ? a_in : *b_in, plan_.bits));
    a_.resize(a_in.size());
    for (size_t i = 0; i < a_.size(); ++i) a_[i] = permute(a_in[i]);
    if (!self_) {
      b_.resize(b_in->size());
      for (size_t i = 0; i < b_.size(); ++i) b_[i] = permute((*b_in)[i]);
    }
    s_ = radius / plan_.m;
    ra_ = plan_.ra;
    rb_ = plan_.rb;
    one_side_ = self_ && ra_ == rb_;
    wide_ = wide_popcount_usable();
    for (int e = 0, sh = 0; e < plan_.m; ++e) {
      table_shift_[e] = sh;
      sh += plan_.bits[static_cast<size_t>(e)];
    }
    // Codes of side a, then of side b (unless one side serves both), are numbered
    // 0..n_codes-1; generation chunks cut that sequence in order.
    n_codes_ = a_.size() + (one_side_ ? 0 : bb().size());
    n_chunks_ = std::clamp<size_t>(n_codes_ / 4096, 1, 8 * size_t{resolve_threads(threads)});
  }

  std::vector<std::pair<uint32_t, uint32_t>> run(uint64_t* found_count) {
    for (int k = 0; k < plan_.m; ++k) run_table(k);
    if (found_count) *found_count = total_found_;
    std::sort(found_.begin(), found_.end());
    found_.erase(std::unique(found_.begin(), found_.end()), found_.end());
    return std::move(found_);
  }

 private:
  // One table: its substring and its buckets.
  struct Table {
    int k = 0, w = 0, shift = 0, low = 0;
    uint64_t mask = 0;
    size_t count = 0, n_buckets = 0;
    std::vector<size_t> place;         // [chunk][bucket]: counts, then write positions
    std::vector<size_t> bucket_start;  // n_buckets + 1
  };

  const std::vector<uint64_t>& bb() const { return self_ ? a_ : b_; }

  // fn(entry) for every entry of chunk c of table t, in order. Entries hold the
  // key in the high 32 bits, the id in bits 0..30, bit 31 set for side b.
  template <typename Fn>
  void for_chunk(const Table& t, size_t c, Fn&& fn) const {
    const std::vector<uint64_t>& a = a_;
    const std::vector<uint64_t>& b = bb();
    const size_t from = n_codes_ * c / n_chunks_, to = n_codes_ * (c + 1) / n_chunks_;
    for (size_t x = from; x < to; ++x) {
      const bool side_b = x >= a.size();
      const uint32_t id = static_cast<uint32_t>(side_b ? x - a.size() : x);
      const uint64_t code = side_b ? b[id] : a[id];
      const uint64_t tag = side_b ? (id | kSideB) : id;
      for_each_within(static_cast<uint32_t>((code >> t.shift) & t.mask), t.w, side_b ? rb_ : ra_,
                      [&](uint32_t v) { fn((uint64_t{v} << 32) | tag); });
    }
  }

  void run_table(int k) {
    Table t;
    t.k = k;
    t.w = plan_.bits[static_cast<size_t>(k)];
    t.shift = table_shift_[k];
    t.mask = (uint64_t{1} << t.w) - 1;
    t.count = a_.size() * binomial_ball(t.w, ra_) + (one_side_ ? 0 : bb().size() * binomial_ball(t.w, rb_));
    // Entries are first placed by the key's top bits into buckets of a few
    // thousand, so that each bucket is then sorted and searched within the
    // processor's cache.
    const int top = std::clamp(static_cast<int>(std::ceil(std::log2(std::max(1.0, double(t.count) / 8192.0)))), 0,
                               std::min(t.w, 16));
    t.low = t.w - top;
    t.n_buckets = size_t{1} << top;
    t.place.assign(n_chunks_ * t.n_buckets, 0);
    parallel_for(n_chunks_, threads_, [&](size_t c) {
      size_t* h = &t.place[c * t.n_buckets];
      for_chunk(t, c, [&](uint64_t e) { ++h[(e >> 32) >> t.low]; });
    }, 1);
    t.bucket_start.assign(t.n_buckets + 1, 0);
    for (size_t d = 0, at = 0; d < t.n_buckets; ++d) {
      t.bucket_start[d] = at;
      for (size_t c = 0; c < n_chunks_; ++c) {
        const size_t n = t.place[c * t.n_buckets + d];
        t.place[c * t.n_buckets + d] = at;
        at += n;
      }
    }
    t.bucket_start[t.n_buckets] = t.count;
    // Slices of whole buckets within the memory budget, each generated and searched in turn.
    for (size_t d0 = 0; d0 < t.n_buckets;) {
      size_t d1 = d0 + 1;
      while (d1 < t.n_buckets && (max_entries_ == 0 || t.bucket_start[d1 + 1] - t.bucket_start[d0] <= max_entries_)) ++d1;
      search_slice(t, d0, d1);
      d0 = d1;
    }
  }

  // Generates the entries of buckets [d0, d1) into the buffer (grown to the
  // largest slice; no zero-filling: every slot is written first), then searches
  // them in tasks of whole buckets holding about 64K entries each.
  void search_slice(Table& t, size_t d0, size_t d1) {
    const size_t base = t.bucket_start[d0], slice = t.bucket_start[d1] - base;
    if (!buffer_ || buffer_->size() < slice) {
      buffer_.reset();
      buffer_ = std::make_unique<LargeBuffer>(slice);
    }
    uint64_t* const entries = buffer_->data();  // entry p of the table at entries[p - base]
    parallel_for(n_chunks_, threads_, [&](size_t c) {
      size_t* pos = &t.place[c * t.n_buckets];
      for_chunk(t, c, [&](uint64_t e) {
        const size_t d = (e >> 32) >> t.low;
        if (d >= d0 && d < d1) entries[pos[d]++ - base] = e;
      });
    }, 1);
    std::vector<size_t> cuts{d0};
    for (size_t d = d0 + 1; d < d1; ++d)
      if (t.bucket_start[d] - t.bucket_start[cuts.back()] >= (size_t{1} << 16)) cuts.push_back(d);
    cuts.push_back(d1);
    std::vector<std::vector<std::pair<uint32_t, uint32_t>>> parts(cuts.size() - 1);
    std::vector<uint64_t> part_found(parts.size(), 0);
    parallel_for(parts.size(), threads_, [&](size_t c) {
      search_buckets(t, entries, base, cuts[c], cuts[c + 1], parts[c], part_found[c]);
    }, 1);
    for (auto& p : parts) found_.insert(found_.end(), p.begin(), p.end());
    for (uint64_t f : part_found) total_found_ += f;
  }

  // Each pair is reported once: only from the first table where its substrings
  // are within s, and there only in its canonical bucket: the a-side key with
  // the lowest min(d, ra) differing bits flipped (the rest flipped on side b).
  bool first_meeting(const Table& t, uint64_t code_a, uint64_t code_b, uint64_t key) const {
    for (int e = 0; e < t.k; ++e) {
      const uint64_t me = (uint64_t{1} << plan_.bits[static_cast<size_t>(e)]) - 1;
      if (__builtin_popcountll(((code_a ^ code_b) >> table_shift_[e]) & me) <= s_) return false;
    }
    const uint64_t d = ((code_a ^ code_b) >> t.shift) & t.mask;
    return ((((code_a >> t.shift) & t.mask) ^ low_bits(d, ra_)) == key);
  }

  // Buckets [from, to) of the slice at `entries`: each sorted by key, then every
  // run of one key compared all against all (or side a against side b).
  void search_buckets(const Table& t, const uint64_t* entries, size_t base, size_t from, size_t to,
                      std::vector<std::pair<uint32_t, uint32_t>>& out, uint64_t& found) const {
    const std::vector<uint64_t>& a = a_;
    const std::vector<uint64_t>& bb = this->bb();
    const int radius = radius_, low = t.low;
    const bool wide = wide_;
    uint64_t n_found = 0;
    auto emit = [&](uint32_t x, uint32_t y) {
      ++n_found;
      if (!keep_ || keep_(x, y)) out.emplace_back(x, y);
    };
    thread_local std::vector<uint64_t> sorted, codes;
    thread_local std::vector<uint32_t> counts;
    for (size_t d = from; d < to; ++d) {
      const size_t b0 = t.bucket_start[d] - base, n = t.bucket_start[d + 1] - t.bucket_start[d];
      if (n < 2) continue;
      // Sort the bucket by key, keeping the generation order (side a before
      // side b, ids ascending) within a key.
      sorted.resize(n);
      if (low == 0) {
        std::copy(entries + b0, entries + b0 + n, sorted.begin());
      } else if (low <= 16) {
        const uint64_t lmask = (uint64_t{1} << low) - 1;
        counts.assign((size_t{1} << low) + 1, 0);
        for (size_t p = 0; p < n; ++p) ++counts[((entries[b0 + p] >> 32) & lmask) + 1];
        for (size_t v = 1; v < counts.size(); ++v) counts[v] += counts[v - 1];
        for (size_t p = 0; p < n; ++p) sorted[counts[(entries[b0 + p] >> 32) & lmask]++] = entries[b0 + p];
      } else {
        std::copy(entries + b0, entries + b0 + n, sorted.begin());
        std::sort(sorted.begin(), sorted.end());  // key, then side, then id: the same order
      }
      // Codes in entry order, so the comparisons below read memory sequentially.
      codes.resize(n);
      for (size_t p = 0; p < n; ++p) codes[p] = (sorted[p] & kSideB ? bb : a)[sorted[p] & kIdMask];
      for (size_t begin = 0; begin < n;) {
        const uint64_t key = sorted[begin] >> 32;
        size_t end = begin;
        while (end < n && (sorted[end] >> 32) == key) ++end;
        if (one_side_) {
          const uint64_t* const cr = codes.data() + begin;
          close_pairs_within(cr, end - begin, radius, wide, [&](size_t px, size_t py) {
            const uint32_t ix = static_cast<uint32_t>(sorted[begin + px] & kIdMask);
            const uint32_t iy = static_cast<uint32_t>(sorted[begin + py] & kIdMask);
            if (ix == iy) return;
            // side a of a self-join pair is its smaller id
            const bool x_first = ix < iy;
            if (!first_meeting(t, x_first ? cr[px] : cr[py], x_first ? cr[py] : cr[px], key)) return;
            emit(std::min(ix, iy), std::max(ix, iy));
          });
        } else {
          // A run is [a..., b...].
          size_t mid = begin;
          while (mid < end && !(sorted[mid] & kSideB)) ++mid;
          // The rare hits are handled apart from the comparisons.
          const uint64_t* const cb = codes.data();
          close_pairs(cb + begin, mid - begin, cb + mid, end - mid, radius, wide, [&](size_t px, size_t py) {
            const size_t x = begin + px, y = mid + py;
            const uint32_t ia = static_cast<uint32_t>(sorted[x] & kIdMask);
            const uint32_t ib = static_cast<uint32_t>(sorted[y] & kIdMask);
            if (!first_meeting(t, cb[x], cb[y], key)) return;
            if (!self_) {
              emit(ia, ib);
            } else if (ia != ib) {
              emit(std::min(ia, ib), std::max(ia, ib));
            }
          });
        }
        begin = end;
      }
    }
    if (sorted.capacity() > (size_t{1} << 20)) {  // do not pin a huge bucket's buffers
      std::vector<uint64_t>().swap(sorted);
      std::vector<uint64_t>().swap(codes);
    }
    found = n_found;
  }

  int radius_;
  unsigned threads_;
  const PairFilter& keep_;
  size_t max_entries_;
  bool self_;
  JoinPlan plan_;
  std::vector<uint64_t> a_, b_;  // the codes permuted; b_ empty for a self-join
  int s_ = 0, ra_ = 0, rb_ = 0;
  bool one_side_ = false, wide_ = false;
  int table_shift_[64] = {};
  size_t n_codes_ = 0, n_chunks_ = 1;
  std::unique_ptr<LargeBuffer> buffer_;
  std::vector<std::pair<uint32_t, uint32_t>> found_;
  uint64_t total_found_ = 0;
};

std::vector<std::pair<uint32_t, uint32_t>> hamming_join(const std::vector<uint64_t>& a_in,
                                                        const std::vector<uint64_t>* b_in, int radius,
                                                        unsigned threads, const PairFilter& keep,
                                                        uint64_t* found_count, size_t max_entries) {
  return HammingJoin(a_in, b_in, radius, threads, keep, max_entries).run(found_count);
}

}  // namespace

std::vector<std::pair<uint32_t, uint32_t>> pairs_within(const std::vector<uint64_t>& codes, int radius,
                                                        unsigned threads) {
  return hamming_join(codes, nullptr, radius, threads, {}, nullptr, 0);
}

std::vector<std::pair<uint32_t, uint32_t>> join_within(const std::vector<uint64_t>& a, const std::vector<uint64_t>& b,
                                                       int radius, unsigned threads, const PairFilter& keep,
                                                       uint64_t* found, size_t memory_bytes) {
  return hamming_join(a, &b, radius, threads, keep, found, memory_bytes / sizeof(uint64_t));
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
