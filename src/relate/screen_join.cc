#include "tamis/relate/screen_join.h"

#include <algorithm>
#include <array>
#include <cmath>
#include <numeric>

#include "tamis/base/parallel.h"
#include "tamis/read/features.h"

namespace tamis {

namespace {

// The screen's coefficients in MatchProfile::low order (match.h): (u, v), u, v
// < 8, 0 < u + v <= 8, row by row.
struct Layout {
  std::array<int, kScreenCoefficients> u{}, v{}, transposed{};
  Layout() {
    int n = 0;
    for (int a = 0; a < 8; ++a)
      for (int b = 0; b < 8; ++b)
        if (a + b > 0 && a + b <= 8) {
          u[size_t(n)] = a;
          v[size_t(n)] = b;
          ++n;
        }
    for (int i = 0; i < kScreenCoefficients; ++i)
      for (int j = 0; j < kScreenCoefficients; ++j)
        if (u[size_t(j)] == v[size_t(i)] && v[size_t(j)] == u[size_t(i)]) transposed[size_t(i)] = j;
  }
};
const Layout& layout() {
  static const Layout l;
  return l;
}

// A point the flips/turns do not move: a flip negates coefficients with an odd
// frequency along its axis (never one with both even), a transpose swaps (u, v)
// with (v, u). Taking the absolute value of every coefficient that can be
// negated, and sorting each transposed pair (larger first), gives every
// flip/turn of a profile the same point; both maps are contractions (|a| - |b|
// <= |a - b|; sorting two numbers never moves them further apart), so two
// points are never further apart than the profiles under any flip/turn.
ScreenKey invariant_point(const ScreenKey& key) {
  const Layout& l = layout();
  ScreenKey f{};
  for (size_t i = 0; i < size_t(kScreenCoefficients); ++i) {
    const int16_t x = key[i];
    f[i] = (l.u[i] % 2 == 0 && l.v[i] % 2 == 0) ? x : static_cast<int16_t>(x < 0 ? -x : x);
  }
  for (size_t i = 0; i < size_t(kScreenCoefficients); ++i) {
    const size_t j = size_t(l.transposed[i]);
    if (l.u[i] < l.v[i]) {
      const int16_t a = f[i], b = f[j];
      f[i] = std::max(a, b);
      f[j] = std::min(a, b);
    }
  }
  return f;
}

// Floor division for the grid's cells.
// Points a cell should hold on average for one more grid coordinate.
constexpr size_t kScreenCellPoints = 4;

inline int cell_of(int x, int w) { return x >= 0 ? x / w : -((-x + w - 1) / w); }

}  // namespace

bool screen_key(const MatchProfile& profile, ScreenKey& key) {
  key.fill(0);
  if (profile.flat) return false;
  int64_t ss = 0;
  for (size_t i = 0; i < size_t(kScreenCoefficients); ++i) ss += int64_t(profile.low[i]) * profile.low[i];
  if (ss == 0) return false;
  const double scale = 32767.0 / std::sqrt(double(ss));
  for (size_t i = 0; i < size_t(kScreenCoefficients); ++i)
    key[i] = static_cast<int16_t>(std::clamp(std::lround(double(profile.low[i]) * scale), -32767L, 32767L));
  return true;
}

int64_t screen_key_distance2(const ScreenKey& a, int t, const ScreenKey& b) {
  const Layout& l = layout();
  int64_t d2 = 0;
  for (size_t i = 0; i < size_t(kScreenCoefficients); ++i) {
    // Coefficient i of a's flip/turn t: a's coefficient at the transposed
    // place when t transposes, negated when t's mirror negates it.
    const int32_t x = a[(t & 4) ? size_t(l.transposed[i]) : i];
    const int32_t d = (turn_negates(t, l.u[i], l.v[i]) ? -x : x) - int32_t(b[i]);
    d2 += int64_t(d) * d;
  }
  return d2;
}

int64_t screen_distance2(const MatchProfile& a, int t, const MatchProfile& b) {
  ScreenKey ka, kb;
  if (!screen_key(a, ka) || !screen_key(b, kb)) return -1;
  return screen_key_distance2(ka, t, kb);
}

int64_t screen_threshold(double radius) {
  if (!(radius > 0)) return 0;
  const double r = radius * 32767.0;
  return static_cast<int64_t>(std::floor(r * r));
}

std::vector<std::pair<uint32_t, uint32_t>> screen_join(const std::vector<MatchProfile>& profiles, int64_t threshold2,
                                                       unsigned threads, const ScreenFilter& admit,
                                                       const ScreenFilter& keep, uint64_t* found) {
  if (found) *found = 0;
  std::vector<std::pair<uint32_t, uint32_t>> hits;
  if (threshold2 <= 0) return hits;
  // The points: the profiles with a key.
  std::vector<ScreenKey> keys(profiles.size());
  std::vector<uint8_t> has(profiles.size());
  parallel_for(profiles.size(), threads, [&](size_t k) { has[k] = screen_key(profiles[k], keys[k]); }, 1024);
  std::vector<uint32_t> id;
  for (uint32_t k = 0; k < profiles.size(); ++k)
    if (has[k]) id.push_back(k);
  const size_t n = id.size();
  if (n < 2) return hits;
  constexpr size_t D = size_t(kScreenCoefficients);
  std::vector<std::array<int16_t, D>> raw(n);
  parallel_for(n, threads, [&](size_t p) { raw[p] = invariant_point(keys[id[p]]); }, 1024);
  // Coordinates ranked by their variance, ties by position: the grid uses the
  // first ones and the comparison reads them first, so it stops early. (The
  // ranking decides only the speed, never a hit.)
  std::array<double, D> spread{};
  for (size_t d = 0; d < D; ++d) {
    int64_t s = 0;
    uint64_t ss = 0;
    for (size_t p = 0; p < n; ++p) {
      s += raw[p][d];
      ss += uint64_t(int64_t(raw[p][d]) * raw[p][d]);
    }
    const double mean = double(s) / double(n);
    spread[d] = double(ss) / double(n) - mean * mean;
  }
  std::array<int, D> order{};
  std::iota(order.begin(), order.end(), 0);
  std::stable_sort(order.begin(), order.end(), [&](int a, int b) { return spread[size_t(a)] > spread[size_t(b)]; });
  // Cells R wide (rounded up: two coordinates within R are then at most one
  // cell apart).
  const int width = static_cast<int>(std::ceil(std::sqrt(double(threshold2)))) + 1;
  // Grid coordinates: while the cells keep several points each. Each cell meets
  // up to 3^dims neighbours, so a grid finer than the points costs more walking
  // than the comparisons it spares.
  int dims = 0;
  {
    std::vector<uint64_t> key(n, 0);
    while (dims < kScreenGridDims) {
      const size_t d = size_t(order[size_t(dims)]);
      std::vector<uint64_t> next(n);
      for (size_t p = 0; p < n; ++p)
        next[p] = key[p] * 0x9E3779B97F4A7C15ull + uint64_t(uint32_t(cell_of(raw[p][d], width)) + 1);
      std::vector<uint64_t> sorted = next;
      std::sort(sorted.begin(), sorted.end());
      const size_t distinct = size_t(std::unique(sorted.begin(), sorted.end()) - sorted.begin());
      if (distinct * kScreenCellPoints > n) break;
      key.swap(next);
      ++dims;
    }
  }
  // Points in the ranked order of coordinates, with their cells; sorted by cell.
  struct Point {
    std::array<int16_t, D> c;
    std::array<int16_t, kScreenGridDims> cell;
  };
  std::vector<Point> pt(n);
  parallel_for(n, threads, [&](size_t p) {
    for (size_t d = 0; d < D; ++d) pt[p].c[d] = raw[p][size_t(order[d])];
    pt[p].cell.fill(0);
    for (int g = 0; g < dims; ++g) pt[p].cell[size_t(g)] = static_cast<int16_t>(cell_of(pt[p].c[size_t(g)], width));
  }, 1024);
  std::vector<std::array<int16_t, D>>().swap(raw);
  std::vector<uint32_t> by_cell(n);
  std::iota(by_cell.begin(), by_cell.end(), 0u);
  std::sort(by_cell.begin(), by_cell.end(), [&](uint32_t a, uint32_t b) {
    return pt[a].cell != pt[b].cell ? pt[a].cell < pt[b].cell : a < b;
  });
  // The cells: runs of one cell in by_cell.
  std::vector<uint32_t> start;
  for (size_t q = 0; q < n; ++q)
    if (q == 0 || pt[by_cell[q]].cell != pt[by_cell[q - 1]].cell) start.push_back(static_cast<uint32_t>(q));
  const size_t cells = start.size();
  start.push_back(static_cast<uint32_t>(n));
  auto cell_at = [&](size_t c) -> const std::array<int16_t, kScreenGridDims>& { return pt[by_cell[start[c]]].cell; };
  // The squared distance of two points, stopping once it passes threshold2.
  auto within = [&](const Point& a, const Point& b) {
    int64_t sum = 0;
    for (size_t d = 0; d < D; d += 6) {
      for (size_t e = d; e < d + 6; ++e) {
        const int64_t x = int64_t(a.c[e]) - b.c[e];
        sum += x * x;
      }
      if (sum > threshold2) return false;
    }
    return true;
  };
  static_assert(kScreenCoefficients % 6 == 0);
  // Each cell c meets the cells c' >= c within one step in every grid
  // coordinate: a trie walk over the sorted cells, level by level.
  const unsigned workers = resolve_threads(threads);
  std::vector<std::vector<std::pair<uint32_t, uint32_t>>> part(cells);
  std::vector<uint64_t> part_found(cells, 0);
  parallel_for(cells, workers, [&](size_t c) {
    const auto& home = cell_at(c);
    std::vector<std::pair<uint32_t, uint32_t>> pairs;  // (point a, point b), a's cell c
    auto meet = [&](size_t other) {
      for (uint32_t x = start[c]; x < start[c + 1]; ++x) {
        const uint32_t a = by_cell[x];
        for (uint32_t y = other == c ? x + 1 : start[other]; y < start[other + 1]; ++y) {
          const uint32_t b = by_cell[y];
          if (within(pt[a], pt[b])) pairs.push_back({a, b});
        }
      }
    };
    // Cells [lo, hi) share the grid coordinates before `level`.
    auto walk = [&](auto&& self, int level, size_t lo, size_t hi) -> void {
      if (level == dims) {
        for (size_t o = lo; o < hi; ++o)
          if (o >= c) meet(o);
        return;
      }
      for (int step = -1; step <= 1; ++step) {
        const int want = home[size_t(level)] + step;
        const size_t a = size_t(std::partition_point(start.begin() + long(lo), start.begin() + long(hi), [&](uint32_t s) {
                                  return pt[by_cell[s]].cell[size_t(level)] < want;
                                }) - start.begin());
        const size_t b = size_t(std::partition_point(start.begin() + long(a), start.begin() + long(hi), [&](uint32_t s) {
                                  return pt[by_cell[s]].cell[size_t(level)] <= want;
                                }) - start.begin());
        if (a < b) self(self, level + 1, a, b);
      }
    };
    walk(walk, 0, 0, cells);
    // Each pair under the 8 flips/turns, both ways round.
    constexpr int kInverse[kDihedralCount] = {0, 1, 2, 3, 4, 6, 5, 7};
    for (const auto& [a, b] : pairs) {
      const uint32_t i = id[a], j = id[b];
      for (int t = 0; t < kDihedralCount; ++t) {
        if (screen_key_distance2(keys[i], t, keys[j]) > threshold2) continue;
        const std::pair<uint32_t, uint32_t> both[2] = {{i * kDihedralCount + uint32_t(t), j},
                                                       {j * kDihedralCount + uint32_t(kInverse[t]), i}};
        for (const auto& h : both) {
          if (admit && !admit(h.first, h.second)) continue;
          ++part_found[c];
          if (!keep || keep(h.first, h.second)) part[c].push_back(h);
        }
      }
    }
  }, 1);
  size_t total = 0;
  for (const auto& p : part) total += p.size();
  hits.reserve(total);
  for (size_t c = 0; c < cells; ++c) {
    hits.insert(hits.end(), part[c].begin(), part[c].end());
    if (found) *found += part_found[c];
  }
  std::sort(hits.begin(), hits.end());
  return hits;
}

std::vector<std::pair<uint32_t, uint32_t>> screen_join_brute_force(const std::vector<MatchProfile>& profiles,
                                                                   int64_t threshold2) {
  std::vector<std::pair<uint32_t, uint32_t>> hits;
  if (threshold2 <= 0) return hits;
  std::vector<ScreenKey> keys(profiles.size());
  std::vector<uint8_t> has(profiles.size());
  for (size_t k = 0; k < profiles.size(); ++k) has[k] = screen_key(profiles[k], keys[k]);
  for (uint32_t i = 0; i < profiles.size(); ++i)
    for (uint32_t j = 0; j < profiles.size(); ++j) {
      if (i == j || !has[i] || !has[j]) continue;
      for (int t = 0; t < kDihedralCount; ++t)
        if (screen_key_distance2(keys[i], t, keys[j]) <= threshold2) hits.push_back({i * kDihedralCount + uint32_t(t), j});
    }
  std::sort(hits.begin(), hits.end());
  return hits;
}

}  // namespace tamis
