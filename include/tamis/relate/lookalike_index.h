// LookalikeIndex: every pair of 64-bit codes within Hamming distance r, found
// exactly, without comparing all pairs.
//
// Multi-index hashing (Norouzi, Punjani & Fleet, "Fast search in Hamming space
// with multi-index hashing", CVPR 2012): the 64 bits are cut into m disjoint
// substrings, each indexed in its own table. If two codes differ in at most r
// bits, then by the pigeonhole principle at least one substring differs in at
// most floor(r / m) bits, so probing every substring value within that radius in
// every table finds every such pair: the search is exact, never approximate.
// m is chosen so that substrings are about log2(N) bits long (bucket occupancy
// near one), which keeps probes and candidates per query small.
//
// Build once, then query from any number of threads (queries are const).
// Results are sorted, so they never depend on thread count.
//
// pairs_within() and join_within() answer all-pairs questions without per-query
// probing: within each table, every code is entered under its substring and every
// substring within ceil(s/2) bits of it (s = floor(r/m)), the entries are placed
// by the key's top bits into cache-sized buckets, each bucket is sorted, and codes
// that meet under one key have substrings within s of each other; only those are
// compared in full. Same pigeonhole argument, so the same exact answer, with
// sequential instead of random memory access. Before the substrings are cut, the
// bit positions are permuted (distances are kept) so that each substring gets an
// even share of the bits that vary: real hashes are far from uniform. The joins
// compare eight codes an instruction where the processor allows (simd.h).
#pragma once

#include <cstddef>
#include <cstdint>
#include <functional>
#include <utility>
#include <vector>

namespace tamis {

class LookalikeIndex {
 public:
  // Indexes `codes` (copied). `radius` is the largest distance any query will ask
  // for; it decides the table layout. `substrings` = 0 picks m from N.
  LookalikeIndex(std::vector<uint64_t> codes, int radius, int substrings = 0);

  // Appends to `out` every id j whose code is within `radius` of `query`
  // (radius <= the build radius), each once, in no particular order.
  void query(uint64_t query, int radius, std::vector<uint32_t>& out) const;

  size_t size() const { return codes_.size(); }
  int substrings() const { return static_cast<int>(tables_.size()); }

 private:
  struct Table {
    int shift = 0, bits = 0;
    std::vector<uint64_t> occupied;  // one bit per bucket: skips empty buckets cheaply
    std::vector<uint32_t> offsets;   // 2^bits + 1 bucket starts into ids/codes
    std::vector<uint32_t> ids;
    std::vector<uint64_t> codes;     // codes in bucket order, beside their ids
    uint32_t key(uint64_t code) const { return static_cast<uint32_t>((code >> shift) & ((uint64_t{1} << bits) - 1)); }
  };
  std::vector<uint64_t> codes_;
  std::vector<Table> tables_;
  int radius_;
};

// All unordered pairs (i < j) of `codes` within distance `radius`, sorted.
// Uses LookalikeIndex; `threads` = 0 means all cores.
std::vector<std::pair<uint32_t, uint32_t>> pairs_within(const std::vector<uint64_t>& codes, int radius,
                                                        unsigned threads = 0);

// Decides whether a pair the join found is returned. Called from the join's
// threads, once for each pair found: it must be thread-safe and pure.
using PairFilter = std::function<bool(uint32_t, uint32_t)>;

// Every (i, j), i indexing `a` and j indexing `b`, with hamming(a[i], b[j]) <=
// radius, sorted. The same sorted self-join technique, across two sets. With
// `keep`, only the pairs it accepts are returned, and `found` (when set)
// receives the number of pairs found before it was asked. `memory_bytes` (0: no
// limit) bounds the join's buffer of entries: above it, the key space is
// searched in slices, each generated afresh (same pairs, more time).
std::vector<std::pair<uint32_t, uint32_t>> join_within(const std::vector<uint64_t>& a, const std::vector<uint64_t>& b,
                                                       int radius, unsigned threads = 0, const PairFilter& keep = {},
                                                       uint64_t* found = nullptr, size_t memory_bytes = 0);

// The same by comparing every pair: the reference the index is tested against.
std::vector<std::pair<uint32_t, uint32_t>> pairs_within_brute_force(const std::vector<uint64_t>& codes, int radius);

inline int hamming(uint64_t a, uint64_t b) { return __builtin_popcountll(a ^ b); }

}  // namespace tamis
