// LookalikeIndex against brute force: the multi-index search must return exactly
// the pairs an all-pairs comparison returns (the pigeonhole argument of Norouzi,
// Punjani & Fleet, CVPR 2012, makes it exact; these tests hold it to that).
#include <catch2/catch.hpp>

#include <mutex>

#include "support/fashion_mnist.h"
#include "tamis/base/parallel.h"
#include "tamis/base/random.h"
#include "tamis/base/simd.h"
#include "tamis/pipeline/audit.h"
#include "tamis/relate/lookalike_index.h"

using namespace tamis;

namespace {
using Pairs = std::vector<std::pair<uint32_t, uint32_t>>;

// Brute force spread over threads; each thread keeps its own rows, then all are sorted.
Pairs brute_force_parallel(const std::vector<uint64_t>& codes, int radius) {
  const size_t n = codes.size();
  std::vector<Pairs> rows((n + 255) / 256);
  parallel_for(rows.size(), 0, [&](size_t c) {
    for (size_t i = c * 256; i < std::min(n, (c + 1) * 256); ++i)
      for (size_t j = i + 1; j < n; ++j)
        if (hamming(codes[i], codes[j]) <= radius) rows[c].emplace_back(uint32_t(i), uint32_t(j));
  }, 1);
  Pairs all;
  for (auto& r : rows) all.insert(all.end(), r.begin(), r.end());
  return all;
}

// Uniform random codes plus, for every distance 0..r, `per_distance` planted pairs.
std::vector<uint64_t> planted_codes(size_t n_uniform, int r, size_t per_distance, uint64_t seed) {
  SplitMix64 rng(seed);
  std::vector<uint64_t> codes;
  for (size_t i = 0; i < n_uniform; ++i) codes.push_back(rng.next());
  for (int d = 0; d <= r; ++d)
    for (size_t k = 0; k < per_distance; ++k) {
      uint64_t a = rng.next(), b = a;
      for (int flipped = 0; flipped < d;) {
        uint64_t bit = uint64_t{1} << rng.below(64);
        if ((a ^ b) & bit) continue;
        b ^= bit;
        ++flipped;
      }
      codes.push_back(a);
      codes.push_back(b);
    }
  // Shuffle so planted pairs are not neighbours in index order.
  seeded_shuffle(codes, rng);
  return codes;
}
}  // namespace

TEST_CASE("index equals brute force on 200,000 codes with planted pairs at every distance 0..8",
          "[lookalike][index][slow]") {
  auto codes = planted_codes(200000 - 9 * 2 * 50, 8, 50, 11);
  REQUIRE(codes.size() == 200000);
  Pairs fast = pairs_within(codes, 8);
  Pairs slow = brute_force_parallel(codes, 8);
  CHECK(fast.size() >= 9 * 50);
  CHECK(fast == slow);
}

TEST_CASE("index equals brute force for other radii and table counts", "[lookalike][index]") {
  for (int r : {0, 1, 3, 6, 12, 16}) {
    auto codes = planted_codes(5000, r, 20, 100 + r);
    Pairs slow = pairs_within_brute_force(codes, r);
    INFO("radius " << r);
    CHECK(pairs_within(codes, r) == slow);
    for (int m : {1, 2, 3, 5, 9}) {
      if (64 / m > 24) continue;  // tables wider than 24 bits are refused by design
      LookalikeIndex index(codes, r, m);
      Pairs got;
      std::vector<uint32_t> hits;
      for (uint32_t i = 0; i < codes.size(); ++i) {
        hits.clear();
        index.query(codes[i], r, hits);
        for (uint32_t j : hits)
          if (j > i) got.emplace_back(i, j);
      }
      std::sort(got.begin(), got.end());
      INFO("tables " << m);
      CHECK(got == slow);
    }
  }
}

TEST_CASE("index equals brute force on the DCT hashes of Fashion-MNIST", "[lookalike][index][fashion-mnist]") {
  AuditSettings s;
  s.root = test::fashion_mnist_tree();
  AuditResult r = run_audit(s);
  std::vector<uint64_t> codes;
  for (const auto& rec : r.records) codes.push_back(rec.features.look.phash[0]);
  REQUIRE(codes.size() == 70000);
  for (int radius : {4, 8}) {
    Pairs fast = pairs_within(codes, radius);
    CHECK(fast == brute_force_parallel(codes, radius));
    CHECK_FALSE(fast.empty());
  }
}

TEST_CASE("results do not depend on the thread count", "[lookalike][index][determinism][threads]") {
  auto codes = planted_codes(20000, 8, 30, 5);
  CHECK(pairs_within(codes, 8, 1) == pairs_within(codes, 8, 4));
}

namespace {
// Every (i, j) across the two sets within the radius, by comparing all pairs.
Pairs cross_brute_force(const std::vector<uint64_t>& a, const std::vector<uint64_t>& b, int radius) {
  Pairs out;
  for (uint32_t i = 0; i < a.size(); ++i)
    for (uint32_t j = 0; j < b.size(); ++j)
      if (hamming(a[i], b[j]) <= radius) out.emplace_back(i, j);
  return out;
}

// Codes whose bits are far from uniform, as real hashes are: a few bits nearly
// constant, the rest copied in runs from a small set of prototypes, then a few flipped.
std::vector<uint64_t> skewed_codes(size_t n, uint64_t seed) {
  SplitMix64 rng(seed);
  std::vector<uint64_t> protos;
  for (int k = 0; k < 12; ++k) protos.push_back(rng.next() | (uint64_t{0xF} << 60));
  std::vector<uint64_t> codes;
  for (size_t i = 0; i < n; ++i) {
    uint64_t c = protos[rng.below(protos.size())];
    for (int f = static_cast<int>(rng.below(9)); f > 0; --f) c ^= uint64_t{1} << rng.below(60);
    codes.push_back(c);
  }
  return codes;
}
}  // namespace

TEST_CASE("cross join equals brute force on skewed codes, with and without a filter", "[lookalike][index]") {
  // Both compare loops: AVX-512 (where this processor has it) and one at a time.
  const bool wide = GENERATE(true, false);
  allow_wide_paths(wide);
  INFO((wide && wide_popcount_usable() ? "AVX-512 compare loop" : "one-at-a-time compare loop"));
  struct Restore {
    ~Restore() { allow_wide_paths(true); }
  } restore;
  for (int r : {0, 2, 5, 8, 12}) {
    auto a = skewed_codes(3000, 40 + r), b = skewed_codes(800, 90 + r);
    Pairs slow = cross_brute_force(a, b, r);
    INFO("radius " << r << ", " << slow.size() << " pairs");
    CHECK(join_within(a, b, r, 2) == slow);
    // A filter sees every pair found, and only the pairs it accepts come back.
    auto keep = [](uint32_t i, uint32_t j) { return (i * 7 + j) % 3 != 0; };
    Pairs kept;
    for (auto p : slow)
      if (keep(p.first, p.second)) kept.push_back(p);
    uint64_t found = 0;
    CHECK(join_within(a, b, r, 2, keep, &found) == kept);
    CHECK(found == slow.size());
    // In slices of at most 64 KB of entries: the same pairs.
    CHECK(join_within(a, b, r, 2, {}, nullptr, 64 << 10) == slow);
    // Sides swapped: the planner expands the other side's substrings (it expands
    // the smaller side of a lopsided join): the same pairs, mirrored.
    Pairs mirrored;
    for (auto [i, j] : slow) mirrored.emplace_back(j, i);
    std::sort(mirrored.begin(), mirrored.end());
    CHECK(join_within(b, a, r, 2) == mirrored);
  }
  // The self-join on the same skewed codes.
  auto codes = skewed_codes(4000, 7);
  CHECK(pairs_within(codes, 8, 2) == pairs_within_brute_force(codes, 8));
}
