// Split tests: the generator, the largest-remainder rule, groups kept whole.
#include <catch2/catch.hpp>

#include <map>
#include <set>

#include "tamis/base/random.h"
#include "tamis/place/split.h"

using namespace tamis;

// Reference: Rosetta Code, "Pseudo-random numbers/Splitmix64": the first five outputs
// for seed 1234567, as produced by Vigna's splitmix64.c.
TEST_CASE("SplitMix64 matches its published reference outputs", "[split][random]") {
  SplitMix64 r(1234567);
  CHECK(r.next() == 6457827717110365317ULL);
  CHECK(r.next() == 3203168211198807973ULL);
  CHECK(r.next() == 9817491932198370423ULL);
  CHECK(r.next() == 4593380528125082431ULL);
  CHECK(r.next() == 16408922859458223821ULL);
  SplitMix64 z(0);
  CHECK(z.next() == 0xe220a8397b1dcdafULL);  // seed 0, same reference implementation
}

// Reference: the FNV-1a test values of Fowler, Noll & Vo (64-bit offset basis; "a"; "foobar").
TEST_CASE("FNV-1a 64 matches the FNV reference values", "[split][random]") {
  CHECK(fnv1a64("") == 0xcbf29ce484222325ULL);
  CHECK(fnv1a64("a") == 0xaf63dc4c8601ec8cULL);
  CHECK(fnv1a64("foobar") == 0x85944171f73967e8ULL);
}

TEST_CASE("seeded shuffle is a permutation and depends on the seed", "[split][random]") {
  std::vector<int> a(100), b;
  for (int i = 0; i < 100; ++i) a[i] = i;
  b = a;
  SplitMix64 r1(5), r2(6);
  seeded_shuffle(a, r1);
  seeded_shuffle(b, r2);
  CHECK(a != b);
  std::sort(a.begin(), a.end());
  for (int i = 0; i < 100; ++i) CHECK(a[i] == i);
}

TEST_CASE("largest remainder rule", "[split]") {
  CHECK(largest_remainder(7000, {70, 15, 15}) == std::array<uint64_t, 3>{4900, 1050, 1050});
  CHECK(largest_remainder(10, {70, 15, 15}) == std::array<uint64_t, 3>{7, 2, 1});  // .5 vs .5: earlier split wins
  CHECK(largest_remainder(1, {70, 15, 15}) == std::array<uint64_t, 3>{1, 0, 0});
  CHECK(largest_remainder(3, {34, 33, 33}) == std::array<uint64_t, 3>{1, 1, 1});
  CHECK(largest_remainder(7, {80, 0, 20}) == std::array<uint64_t, 3>{6, 0, 1});  // 5.6/1.4
  CHECK(largest_remainder(0, {70, 15, 15}) == std::array<uint64_t, 3>{0, 0, 0});
  for (uint64_t n = 0; n < 500; ++n) {
    auto c = largest_remainder(n, {70, 15, 15});
    CHECK(c[0] + c[1] + c[2] == n);
    for (int s = 0; s < 3; ++s) {
      double q = n * std::array<double, 3>{0.70, 0.15, 0.15}[s];
      CHECK(std::abs(double(c[s]) - q) < 1.0);  // each count within one of its exact quota
    }
  }
}

TEST_CASE("split spec parsing", "[split]") {
  CHECK(parse_split_spec("70/15/15") == std::array<uint32_t, 3>{70, 15, 15});
  CHECK(parse_split_spec("80/20") == std::array<uint32_t, 3>{80, 0, 20});
  CHECK_THROWS_AS(parse_split_spec("70/20"), std::invalid_argument);
  CHECK_THROWS_AS(parse_split_spec("70/15/10/5"), std::invalid_argument);
  CHECK_THROWS_AS(parse_split_spec("x/50"), std::invalid_argument);
  CHECK_THROWS_AS(parse_split_spec("0/100"), std::invalid_argument);
  CHECK_THROWS_AS(parse_split_spec(""), std::invalid_argument);
}

TEST_CASE("no group spans two splits, class shares stay near target (property test)", "[split][groups]") {
  SplitMix64 rng(42);
  for (int trial = 0; trial < 200; ++trial) {
    size_t classes = 1 + rng.below(6);
    size_t n = 1 + rng.below(400);
    std::vector<std::string> names;
    for (size_t c = 0; c < classes; ++c) names.push_back("c" + std::to_string(c));
    std::vector<SplitItem> items(n);
    int64_t next_group = 0;
    for (size_t i = 0; i < n; ++i) {
      items[i].label = static_cast<int32_t>(rng.below(classes));
      items[i].eligible = rng.below(20) != 0;
      if (rng.below(4) == 0) items[i].group = static_cast<int64_t>(rng.below(static_cast<uint64_t>(next_group) + 1));
      if (items[i].group == next_group) ++next_group;
    }
    SplitSettings s;
    s.seed = rng.next();
    s.folds = trial % 2 ? 4 : 0;
    s.method = trial % 3 == 0 ? SplitMethod::stable : SplitMethod::shuffle;
    auto outcome = assign_splits(items, names, s);
    const auto& placed = outcome.placement;
    std::map<int64_t, std::set<std::pair<Placement, int32_t>>> seen;
    for (size_t i = 0; i < n; ++i) {
      if (!items[i].eligible) CHECK(placed[i] == Placement::excluded);
      else CHECK(placed[i] != Placement::excluded);
      if (s.folds && placed[i] != Placement::excluded && placed[i] != Placement::test) CHECK(outcome.fold[i] >= 0);
      if (items[i].group >= 0 && items[i].eligible) seen[items[i].group].insert({placed[i], outcome.fold[i]});
    }
    for (const auto& [g, splits] : seen) CHECK(splits.size() == 1);  // neither split nor fold divides a group
    CHECK(assign_splits(items, names, s).placement == placed);  // deterministic
  }
}

TEST_CASE("without groups, every class meets its largest-remainder target exactly", "[split]") {
  std::vector<std::string> names{"a", "b", "c"};
  std::vector<SplitItem> items;
  for (int c = 0; c < 3; ++c)
    for (int i = 0; i < 101 + c * 37; ++i) items.push_back({c, -1, true, {}, Placement::excluded});
  for (uint64_t seed : {1ULL, 2ULL, 99ULL}) {
    SplitSettings s;
    s.seed = seed;
    auto placed = assign_splits(items, names, s).placement;
    std::array<std::array<uint64_t, 3>, 3> got{};
    for (size_t i = 0; i < items.size(); ++i) ++got[items[i].label][static_cast<size_t>(placed[i])];
    for (int c = 0; c < 3; ++c) CHECK(got[c] == largest_remainder(101 + c * 37, s.percent));
  }
}
