#include "tamis/relate/groups.h"

#include <algorithm>
#include <tuple>
#include <numeric>
#include <stdexcept>

#include "tamis/base/parallel.h"
#include "tamis/read/features.h"
#include "tamis/relate/lookalike_index.h"
#include "tamis/relate/screen_join.h"

namespace tamis {

namespace {

class UnionFind {
 public:
  explicit UnionFind(size_t n) : parent_(n), rank_(n, 0) { std::iota(parent_.begin(), parent_.end(), 0u); }
  uint32_t find(uint32_t x) {
    while (parent_[x] != x) {
      parent_[x] = parent_[parent_[x]];
      x = parent_[x];
    }
    return x;
  }
  bool unite(uint32_t a, uint32_t b) {  // true when a and b were apart
    a = find(a);
    b = find(b);
    if (a == b) return false;
    if (rank_[a] < rank_[b]) std::swap(a, b);
    parent_[b] = a;
    if (rank_[a] == rank_[b]) ++rank_[a];
    return true;
  }

 private:
  std::vector<uint32_t> parent_;
  std::vector<uint8_t> rank_;
};

constexpr size_t kExactDiameterLimit = 512;

// Phase 1, byte-identical files: runs of equal content hash joined, with a link
// each. exact_root[k]: the first of k's run. Returns the pairs within runs.
uint64_t join_byte_identical(const std::vector<FileRecord>& records, const std::vector<uint32_t>& eligible, UnionFind& uf,
                             std::vector<GroupLink>& links, std::vector<uint32_t>& exact_root) {
  const size_t n = eligible.size();
  exact_root.resize(n);
  std::iota(exact_root.begin(), exact_root.end(), 0u);
  uint64_t exact_pairs = 0;
  std::vector<uint32_t> by_hash(n);
  std::iota(by_hash.begin(), by_hash.end(), 0u);
  auto hash_of = [&](uint32_t k) { return records[eligible[k]].features.content_hash; };
  std::sort(by_hash.begin(), by_hash.end(), [&](uint32_t a, uint32_t b) {
    return hash_of(a) != hash_of(b) ? hash_of(a) < hash_of(b) : a < b;
  });
  for (size_t k = 1; k < n; ++k)
    if (hash_of(by_hash[k]) == hash_of(by_hash[k - 1])) {
      if (uf.unite(by_hash[k - 1], by_hash[k]))
        links.push_back({std::min(by_hash[k - 1], by_hash[k]), std::max(by_hash[k - 1], by_hash[k]), -1, 1.0f, 0, false});
      exact_root[by_hash[k]] = exact_root[by_hash[k - 1]];
      ++exact_pairs;
    }
  return exact_pairs;
}

// Confirms kept hits (8 * image + t, j), sorted by their first member: turns each
// (image, t) thumbnail once, then compares it with its partners (match.h), and
// appends the pairs that match to `confirmed`, said of (a, b), a < b. The hits
// of one (image, t) form a task. From a spilled table (a scratch file) the tasks
// go in batches, each first reading the thumbnails its hits name (about
// kConfirmBatch of them: runs of neighbouring records in one read each) rather
// than one read per partner; the results are the same either way.
constexpr size_t kConfirmBatch = 16384;  // thumbnails a batch reads at most (plus one task's): 19 MB

void confirm_hits(const std::vector<std::pair<uint32_t, uint32_t>>& hits, const ThumbnailTable& thumbs,
                  const std::vector<uint32_t>& eligible, const std::vector<MatchProfile>& profile,
                  const std::vector<PictureSize>& size, const GroupSettings& settings, std::vector<GroupLink>& confirmed) {
  std::vector<size_t> starts;
  for (size_t h = 0; h < hits.size(); ++h)
    if (h == 0 || hits[h].first != hits[h - 1].first) starts.push_back(h);
  starts.push_back(hits.size());
  const size_t tasks = starts.size() - 1;
  std::vector<std::vector<GroupLink>> found(tasks);
  // Task g with thumb_of(k): image k's thumbnail (k indexes `eligible`).
  auto confirm_task = [&](size_t g, const auto& thumb_of) {
    const uint32_t i = hits[starts[g]].first / kDihedralCount;
    const int t = static_cast<int>(hits[starts[g]].first % kDihedralCount);
    Thumbnail turned;
    turn_thumbnail(thumb_of(i), turned, t);
    std::vector<float> spectrum;  // the turned thumbnail's DCT, once needed
    for (size_t h = starts[g]; h < starts[g + 1]; ++h) {
      const uint32_t j = hits[h].second;
      const Match m = match_thumbnails(turned, profile[i], t, thumb_of(j), profile[j],
                                       pair_settings(settings.match, size[i], size[j], t), &spectrum);
      if (!m.joined) continue;
      // Said of the pair (a, b), a < b: the flip/turn of a that matches b
      // (the inverse of t when the hit was b's), and which side was blurred.
      constexpr int kInverse[kDihedralCount] = {0, 1, 2, 3, 4, 6, 5, 7};
      const bool forward = i < j;
      const int fit = !m.fitted ? 0 : (m.fitted_a == forward ? 1 : 2);
      found[g].push_back({std::min(i, j), std::max(i, j), forward ? t : kInverse[t], m.correlation, m.blur_step,
                          forward ? m.blurred_a : !m.blurred_a, fit, m.resampled, m.jpeg_quality});
    }
  };
  if (!thumbs.spilled()) {
    parallel_for(tasks, settings.threads, [&](size_t g) {
      confirm_task(g, [&](uint32_t k) -> const Thumbnail& { return thumbs.at(eligible[k]); });
    }, 64);
  } else {
    constexpr uint32_t kUnseen = UINT32_MAX;
    std::vector<uint32_t> slot_of(eligible.size(), kUnseen);
    std::vector<uint32_t> named, records;
    std::vector<Thumbnail> batch;
    for (size_t g = 0; g < tasks;) {
      // The batch: whole tasks, until their images reach kConfirmBatch.
      named.clear();
      auto name = [&](uint32_t k) {
        if (slot_of[k] == kUnseen) {
          slot_of[k] = 0;
          named.push_back(k);
        }
      };
      size_t end = g;
      while (end < tasks && named.size() < kConfirmBatch) {
        name(hits[starts[end]].first / kDihedralCount);
        for (size_t h = starts[end]; h < starts[end + 1]; ++h) name(hits[h].second);
        ++end;
      }
      std::sort(named.begin(), named.end());  // ascending images, ascending records
      records.resize(named.size());
      for (size_t q = 0; q < named.size(); ++q) {
        slot_of[named[q]] = static_cast<uint32_t>(q);
        records[q] = eligible[named[q]];
      }
      batch.resize(named.size());
      thumbs.get_many(records.data(), records.size(), batch.data());
      parallel_for(end - g, settings.threads, [&](size_t d) {
        confirm_task(g + d, [&](uint32_t k) -> const Thumbnail& { return batch[slot_of[k]]; });
      }, 64);
      for (uint32_t k : named) slot_of[k] = kUnseen;
      g = end;
    }
  }
  for (auto& f : found) confirmed.insert(confirmed.end(), f.begin(), f.end());
}

// The third candidate key's hits (8 * eligible i + t, eligible j), sorted: pairs
// of images in colour (`coloured`: ascending eligible indices; `value`: their
// value profiles, match.h value_profile) whose value keys lie within
// threshold2, that `admit` accepts (the hash did not give them; a join slice
// also asks for its own queries) and that the gray key (their `profile`) did
// not give either, less those `keep` rejects; both filters take eligible
// indices. Adds the hits admitted to *found.
std::vector<std::pair<uint32_t, uint32_t>> value_key_hits(const std::vector<uint32_t>& coloured,
                                                          const std::vector<MatchProfile>& value,
                                                          const std::vector<MatchProfile>& profile, int64_t threshold2,
                                                          unsigned threads, const PairFilter& admit, const PairFilter& keep,
                                                          uint64_t* found) {
  auto variant = [&](uint32_t v) { return coloured[v / kDihedralCount] * kDihedralCount + v % kDihedralCount; };
  uint64_t admitted = 0;
  auto hits = screen_join(value, threshold2, threads, [&](uint32_t v, uint32_t cj) {
    const uint32_t i = coloured[v / kDihedralCount], j = coloured[cj];
    if (!admit(variant(v), j)) return false;
    const int64_t d2 = screen_distance2(profile[i], static_cast<int>(v % kDihedralCount), profile[j]);
    return d2 < 0 || d2 > threshold2;
  }, [&](uint32_t v, uint32_t cj) { return keep(variant(v), coloured[cj]); }, &admitted);
  *found += admitted;
  for (auto& [v, j] : hits) {  // to eligible indices (ascending with the compact ones)
    v = variant(v);
    j = coloured[j];
  }
  return hits;
}

// Phase 2, look-alikes: candidates from an exact Hamming join of each flip/turn's
// codes with the identity codes, confirmed by the thumbnails (match.h). Returns
// the confirmed pairs (eligible indices, in no order: one_link_a_pair sorts them
// and keeps one a pair). Fills the candidate count of `out`.
std::vector<GroupLink> join_lookalikes(const std::vector<FileRecord>& records, const ThumbnailTable& thumbs,
                                       const std::vector<uint32_t>& eligible, const GroupSettings& settings,
                                       GroupResult& out) {
  const size_t n = eligible.size();
  if (n < 2) return {};
  std::vector<uint64_t> identity(n);
  for (size_t k = 0; k < n; ++k) identity[k] = records[eligible[k]].features.look.phash[0];
  // Per image: the match profile (match.h, 128 bytes): the thumbnail's sums,
  // spectral moments and low DCT coefficients, whose bounds reject most hash
  // hits before any thumbnail is compared.
  std::vector<MatchProfile> profile(n);
  constexpr size_t kBlock = 256;  // thumbnails read at once (runs of neighbours: one read from a scratch file)
  parallel_for((n + kBlock - 1) / kBlock, settings.threads, [&](size_t b) {
    const size_t first = b * kBlock, count = std::min(kBlock, n - first);
    std::vector<Thumbnail> block(count);
    thumbs.get_many(eligible.data() + first, count, block.data());
    for (size_t k = 0; k < count; ++k) profile[first + k] = match_profile(block[k]);
  }, 1);
  // Per image: its pixel size (pair_settings: the allowance, the resampled comparison).
  std::vector<PictureSize> size(n);
  for (size_t k = 0; k < n; ++k) size[k] = picture_size(records[eligible[k]].probe);
  // A hit (8 * image + t, j) goes on to the confirmation unless it pairs an
  // image with itself or the profiles prove that the thumbnails cannot match
  // (neither as they are nor with any blur step the pair would try).
  const PairFilter keep = [&](uint32_t variant, uint32_t j) {
    const uint32_t i = variant / kDihedralCount;
    if (i == j) return false;
    const int t = static_cast<int>(variant % kDihedralCount);
    return match_may_join(profile[i], t, profile[j], pair_settings(settings.match, size[i], size[j], t));
  };
  // Hits of an image with itself are counted by the join but are no candidates.
  uint64_t self_hits = 0;
  for (size_t k = 0; k < n; ++k)
    for (int t = 0; t < kDihedralCount; ++t) self_hits += hamming(records[eligible[k]].features.look.phash[t], identity[k]) <= settings.radius;
  std::vector<GroupLink> confirmed;
  // One join of all 8 variants (id = 8 * image + t) is fastest (one plan, one
  // pass over the buckets); it holds the 8 codes of every image twice (as given
  // and with their bits permuted, 128 bytes a file), so it is used while they
  // take at most a quarter of the memory budget. Above that the variants are
  // joined one at a time. Either way the join's buffer of entries is searched in
  // slices of the key space within the budget. The join is exact: both give the
  // same pairs.
  const bool one_join = double(n) * 2.0 * kDihedralCount * sizeof(uint64_t) <= 0.25 * double(settings.join_memory_bytes);
  uint64_t found = 0;
  if (one_join) {
    std::vector<uint64_t> variants(n * kDihedralCount);
    for (size_t k = 0; k < n; ++k)
      for (int t = 0; t < kDihedralCount; ++t) variants[k * kDihedralCount + t] = records[eligible[k]].features.look.phash[t];
    confirm_hits(join_within(variants, identity, settings.radius, settings.threads, keep, &found, settings.join_memory_bytes),
                 thumbs, eligible, profile, size, settings, confirmed);
    out.candidate_hits += found;
  } else {
    std::vector<uint64_t> variant(n);
    for (int t = 0; t < kDihedralCount; ++t) {
      for (size_t k = 0; k < n; ++k) variant[k] = records[eligible[k]].features.look.phash[t];
      const PairFilter keep_t = [&](uint32_t i, uint32_t j) {
        return keep(i * kDihedralCount + static_cast<uint32_t>(t), j);
      };
      auto hits = join_within(variant, identity, settings.radius, settings.threads, keep_t, &found,
                              settings.join_memory_bytes);
      out.candidate_hits += found;
      for (auto& h : hits) h.first = h.first * kDihedralCount + static_cast<uint32_t>(t);
      confirm_hits(hits, thumbs, eligible, profile, size, settings, confirmed);
    }
  }
  out.candidate_hits -= self_hits;
  // The second key: hits of the screen coefficients that the hash did not give.
  uint64_t screen_found = 0;
  const PairFilter hash_miss = [&](uint32_t v, uint32_t j) {
    return hamming(records[eligible[v / kDihedralCount]].features.look.phash[v % kDihedralCount], identity[j]) > settings.radius;
  };
  const auto screen_hits = screen_join(profile, screen_threshold(settings.screen_radius), settings.threads, hash_miss, keep,
                                       &screen_found);
  out.candidate_hits += screen_found;
  confirm_hits(screen_hits, thumbs, eligible, profile, size, settings, confirmed);
  // The third key: the value plane's screen coefficients (value_profile), for
  // the images in colour, hits that neither the hash nor the gray key gave.
  std::vector<uint32_t> coloured;
  for (uint32_t k = 0; k < n; ++k)
    if (profile[k].colour) coloured.push_back(k);
  const int64_t threshold2 = screen_threshold(settings.screen_radius);
  if (threshold2 > 0 && coloured.size() >= 2) {
    std::vector<MatchProfile> value(coloured.size());
    parallel_for((coloured.size() + kBlock - 1) / kBlock, settings.threads, [&](size_t b) {
      const size_t first = b * kBlock, count = std::min(kBlock, coloured.size() - first);
      std::vector<uint32_t> recs(count);
      for (size_t q = 0; q < count; ++q) recs[q] = eligible[coloured[first + q]];
      std::vector<Thumbnail> block(count);
      thumbs.get_many(recs.data(), count, block.data());
      for (size_t q = 0; q < count; ++q) value[first + q] = value_profile(block[q]);
    }, 1);
    const auto value_hits = value_key_hits(coloured, value, profile, threshold2, settings.threads, hash_miss, keep,
                                           &out.candidate_hits);
    confirm_hits(value_hits, thumbs, eligible, profile, size, settings, confirmed);
  }
  return confirmed;
}

// One measurement a pair: its first in (a, b, turn, blur step) order.
void one_link_a_pair(std::vector<GroupLink>& confirmed) {
  std::sort(confirmed.begin(), confirmed.end(), [](const GroupLink& x, const GroupLink& y) {
    return std::tie(x.a, x.b, x.turn, x.blur_step, x.blurred_a, x.fit_source, x.resampled, x.jpeg_quality) <
           std::tie(y.a, y.b, y.turn, y.blur_step, y.blurred_a, y.fit_source, y.resampled, y.jpeg_quality);
  });
  confirmed.erase(std::unique(confirmed.begin(), confirmed.end(),
                              [](const GroupLink& x, const GroupLink& y) { return x.a == y.a && x.b == y.b; }),
                  confirmed.end());
}

// Record indices of the readable images, the ones the join sees.
std::vector<uint32_t> eligible_images(const std::vector<FileRecord>& records) {
  std::vector<uint32_t> eligible;
  for (uint32_t i = 0; i < records.size(); ++i)
    if (records[i].kind == FileKind::image && records[i].features.has_lookalike) eligible.push_back(i);
  return eligible;
}

// Phase 3, the groups: components of two or more members, numbered by first
// member, with their exactness, diameter and links, in record indices.
void make_groups(const std::vector<FileRecord>& records, const std::vector<uint32_t>& eligible,
                 const std::vector<uint32_t>& exact_root, const std::vector<GroupLink>& links, UnionFind& uf,
                 GroupResult& out) {
  const size_t n = eligible.size();
  // Components with two or more members, numbered by first member.
  std::vector<int64_t> comp_of_root(n, -1);
  for (uint32_t k = 0; k < n; ++k) {  // k ascending = record order ascending
    uint32_t r = uf.find(k);
    if (comp_of_root[r] < 0) {
      comp_of_root[r] = static_cast<int64_t>(out.groups.size());
      out.groups.emplace_back();
    }
    out.groups[static_cast<size_t>(comp_of_root[r])].members.push_back(k);
  }
  // Components of two or more, in order, are the groups kept.
  std::vector<int64_t> comp_kept(out.groups.size(), -1);
  for (size_t c = 0, next = 0; c < out.groups.size(); ++c)
    if (out.groups[c].members.size() >= 2) comp_kept[c] = static_cast<int64_t>(next++);
  std::vector<Group> kept;
  for (auto& g : out.groups) {
    if (g.members.size() < 2) continue;
    g.exact = std::all_of(g.members.begin(), g.members.end(),
                          [&](uint32_t k) { return exact_root[k] == exact_root[g.members.front()]; });
    // Diameter over the members' look-alike codes.
    auto dist = [&](uint32_t x, uint32_t y) {
      return lookalike_distance(records[eligible[x]].features.look, records[eligible[y]].features.look);
    };
    if (g.members.size() <= kExactDiameterLimit) {
      for (size_t p = 0; p < g.members.size(); ++p)
        for (size_t q = p + 1; q < g.members.size(); ++q) g.diameter = std::max(g.diameter, dist(g.members[p], g.members[q]));
    } else {
      g.diameter_exact = false;
      uint32_t far = g.members.front();
      for (int sweep = 0; sweep < 2; ++sweep) {
        uint32_t from = far;
        int best = -1;
        for (uint32_t m : g.members) {
          int d = dist(from, m);
          if (d > best) {
            best = d;
            far = m;
          }
        }
        g.diameter = std::max(g.diameter, best);
      }
    }
    for (auto& m : g.members) m = eligible[m];  // to record indices
    kept.push_back(std::move(g));
  }
  // Each link to its group, in record indices (links come in the order above).
  for (const GroupLink& l : links) {
    const int64_t gk = comp_kept[static_cast<size_t>(comp_of_root[uf.find(l.a)])];
    if (gk < 0) continue;
    GroupLink r = l;
    r.a = eligible[l.a];
    r.b = eligible[l.b];
    kept[static_cast<size_t>(gk)].links.push_back(r);
  }
  out.groups = std::move(kept);
  for (size_t gi = 0; gi < out.groups.size(); ++gi)
    for (uint32_t m : out.groups[gi].members) out.group_of[m] = static_cast<int64_t>(gi);
}


}  // namespace

std::string group_settings_key(const GroupSettings& s) {
  std::string key;
  auto add = [&](const auto& v) { key.append(reinterpret_cast<const char*>(&v), sizeof v); };
  add(kMatchRules);  // groups made by older rules are not reused
  add(s.radius);
  add(s.match.min_correlation);
  add(s.match.max_local);
  add(s.match.max_chroma);
  add(s.match.max_chroma_local);
  add(s.match.fit_floor);
  add(s.match.small_side);
  add(s.screen_radius);
  return key;
}

int lookalike_distance(const LookalikeCodes& a, const LookalikeCodes& b) {
  int best = 64;
  for (int t = 0; t < kDihedralCount; ++t) best = std::min(best, hamming(a.phash[t], b.phash[0]));
  return best;
}

namespace {

// The groups from the look-alike pairs (eligible indices, one a pair, sorted):
// byte-identical files joined first, then the pairs in order.
void finish_groups(const std::vector<FileRecord>& records, const std::vector<uint32_t>& eligible,
                   const std::vector<GroupLink>& confirmed, GroupResult& out) {
  out.group_of.assign(records.size(), -1);
  UnionFind uf(eligible.size());
  std::vector<GroupLink> links;  // in eligible indices until the groups are made
  std::vector<uint32_t> exact_root;
  out.exact_pairs = join_byte_identical(records, eligible, uf, links, exact_root);
  out.confirmed_pairs = confirmed.size();
  for (const GroupLink& l : confirmed)
    if (uf.unite(l.a, l.b)) links.push_back(l);
  make_groups(records, eligible, exact_root, links, uf, out);
}

}  // namespace

GroupResult find_groups(const std::vector<FileRecord>& records, const ThumbnailTable& thumbs,
                        const GroupSettings& settings) {
  GroupResult out;
  const std::vector<uint32_t> eligible = eligible_images(records);
  for (uint32_t i : eligible)
    if (!thumbs.has(i)) throw std::logic_error("find_groups: an image without its thumbnail");
  std::vector<GroupLink> confirmed = join_lookalikes(records, thumbs, eligible, settings, out);
  one_link_a_pair(confirmed);
  finish_groups(records, eligible, confirmed, out);
  return out;
}

LookalikeLinks join_lookalike_slice(const std::vector<FileRecord>& records, const GroupSettings& settings,
                                    uint32_t slice, uint32_t slices, const ThumbnailSource& load) {
  if (slices == 0 || slice >= slices) throw std::invalid_argument("join_lookalike_slice: no such slice");
  LookalikeLinks result;
  const std::vector<uint32_t> eligible = eligible_images(records);
  const size_t n = eligible.size();
  if (n < 2) return result;
  std::vector<uint64_t> identity(n);
  for (size_t k = 0; k < n; ++k) identity[k] = records[eligible[k]].features.look.phash[0];
  // The slice's query images: eligible k with k mod slices == slice.
  std::vector<uint32_t> query;
  for (uint32_t k = slice; k < n; k += slices) query.push_back(k);
  // Images whose profiles or thumbnails a batch needs (eligible indices,
  // ascending) and the records they are: read through `load`, kBlock at a time.
  constexpr size_t kBlock = 4096;
  auto read = [&](const std::vector<uint32_t>& which, const auto& each) {
    std::vector<uint32_t> recs;
    std::vector<Thumbnail> block;
    for (size_t first = 0; first < which.size(); first += kBlock) {
      const size_t count = std::min(kBlock, which.size() - first);
      recs.resize(count);
      for (size_t q = 0; q < count; ++q) recs[q] = eligible[which[first + q]];
      block.resize(count);
      load(recs.data(), count, block.data());
      parallel_for(count, settings.threads, [&](size_t q) { each(first + q, block[q]); }, 64);
    }
  };
  auto size_of = [&](uint32_t k) {
    const FileRecord& r = records[eligible[k]];
    return picture_size(r.probe);
  };
  // The queries go in batches whose hits (before the profiles' filter) stay
  // near a budget taken from the join's memory budget; the next batch's size
  // follows from the last one's hits per query. Batching never changes a pair.
  const size_t hit_budget = std::max<size_t>(size_t{1} << 20, settings.join_memory_bytes / 16);
  size_t batch = std::min(query.size(), std::clamp<size_t>(hit_budget / 64, 256, size_t{1} << 16));
  std::vector<GroupLink> confirmed;
  // Confirms kept hits (8 * eligible i + t, eligible j), sorted: their images'
  // thumbnails read in local order (ascending with the eligible order, so a < b
  // is kept), confirmed as the whole join does; the links go to `confirmed`.
  auto confirm_kept = [&](std::vector<std::pair<uint32_t, uint32_t>>& kept) {
    std::vector<uint32_t> local;
    for (const auto& [v, j] : kept) {
      local.push_back(v / kDihedralCount);
      local.push_back(j);
    }
    std::sort(local.begin(), local.end());
    local.erase(std::unique(local.begin(), local.end()), local.end());
    auto at = [&](uint32_t k) {
      return static_cast<uint32_t>(std::lower_bound(local.begin(), local.end(), k) - local.begin());
    };
    for (auto& [v, j] : kept) {
      v = at(v / kDihedralCount) * kDihedralCount + v % kDihedralCount;
      j = at(j);
    }
    std::sort(kept.begin(), kept.end());
    ThumbnailTable thumbs;
    thumbs.assign_all(local.size());
    std::vector<MatchProfile> local_profile(local.size());
    std::vector<PictureSize> local_size(local.size());
    read(local, [&](size_t q, const Thumbnail& th) {
      thumbs.at(q) = th;
      local_profile[q] = match_profile(th);
      local_size[q] = size_of(local[q]);
    });
    std::vector<uint32_t> slots(local.size());
    std::iota(slots.begin(), slots.end(), 0u);
    std::vector<GroupLink> found_links;
    confirm_hits(kept, thumbs, slots, local_profile, local_size, settings, found_links);
    for (GroupLink& l : found_links) {  // local -> record indices (both ascend together)
      l.a = eligible[local[l.a]];
      l.b = eligible[local[l.b]];
      confirmed.push_back(l);
    }
  };
  std::vector<uint64_t> variants;
  for (size_t first = 0; first < query.size();) {
    const size_t count = std::min(batch, query.size() - first);
    variants.resize(count * kDihedralCount);
    for (size_t q = 0; q < count; ++q)
      for (int t = 0; t < kDihedralCount; ++t)
        variants[q * kDihedralCount + t] = records[eligible[query[first + q]]].features.look.phash[t];
    uint64_t found = 0;
    const PairFilter not_self = [&](uint32_t v, uint32_t j) { return query[first + v / kDihedralCount] != j; };
    auto hits = join_within(variants, identity, settings.radius, settings.threads, not_self, &found,
                            settings.join_memory_bytes);
    uint64_t self_hits = 0;
    for (size_t q = 0; q < count; ++q) {
      const uint32_t k = query[first + q];
      for (int t = 0; t < kDihedralCount; ++t)
        self_hits += hamming(records[eligible[k]].features.look.phash[t], identity[k]) <= settings.radius;
    }
    result.candidate_hits += found - self_hits;
    // The profiles of the images the hits name (128 bytes each; each thumbnail
    // read once and let go), then the hits they allow, as the whole join's filter.
    std::vector<uint32_t> named;
    named.reserve(hits.size() + count);
    for (const auto& [v, j] : hits) {
      named.push_back(query[first + v / kDihedralCount]);
      named.push_back(j);
    }
    std::sort(named.begin(), named.end());
    named.erase(std::unique(named.begin(), named.end()), named.end());
    auto pos = [&](uint32_t k) {
      return static_cast<uint32_t>(std::lower_bound(named.begin(), named.end(), k) - named.begin());
    };
    std::vector<MatchProfile> profile(named.size());
    std::vector<PictureSize> size(named.size());
    read(named, [&](size_t q, const Thumbnail& th) {
      profile[q] = match_profile(th);
      size[q] = size_of(named[q]);
    });
    std::vector<std::pair<uint32_t, uint32_t>> kept;  // (8 * eligible i + t, eligible j)
    for (const auto& [v, j] : hits) {
      const uint32_t i = query[first + v / kDihedralCount];
      const uint32_t pi = pos(i), pj = pos(j);
      const int t = static_cast<int>(v % kDihedralCount);
      if (match_may_join(profile[pi], t, profile[pj], pair_settings(settings.match, size[pi], size[pj], t)))
        kept.push_back({i * kDihedralCount + static_cast<uint32_t>(t), j});
    }
    const size_t batch_hits = hits.size();
    std::vector<std::pair<uint32_t, uint32_t>>().swap(hits);
    std::vector<MatchProfile>().swap(profile);
    confirm_kept(kept);
    first += count;
    // The next batch: as many queries as the budget allows at this batch's rate.
    const double per_query = double(batch_hits) / double(count);
    batch = per_query <= 0 ? count * 2 : std::clamp<size_t>(static_cast<size_t>(double(hit_budget) / per_query), 256, size_t{1} << 20);
  }
  // The second key (screen_join.h) for the slice's queries: every image's
  // profile (128 bytes each), the hits the hash did not give, confirmed as above.
  const int64_t threshold2 = screen_threshold(settings.screen_radius);
  if (threshold2 > 0) {
    std::vector<uint32_t> all(n);
    std::iota(all.begin(), all.end(), 0u);
    std::vector<MatchProfile> profile(n);
    read(all, [&](size_t q, const Thumbnail& th) { profile[q] = match_profile(th); });
    std::vector<PictureSize> size(n);
    for (uint32_t k = 0; k < n; ++k) size[k] = size_of(k);
    // Hits of the slice's queries that the hash did not give; kept as the whole
    // join's filter keeps them.
    const PairFilter mine = [&](uint32_t v, uint32_t j) {
      const uint32_t i = v / kDihedralCount;
      return i % slices == slice && hamming(records[eligible[i]].features.look.phash[v % kDihedralCount], identity[j]) > settings.radius;
    };
    const PairFilter keep = [&](uint32_t v, uint32_t j) {
      const uint32_t i = v / kDihedralCount;
      const int t = static_cast<int>(v % kDihedralCount);
      return match_may_join(profile[i], t, profile[j], pair_settings(settings.match, size[i], size[j], t));
    };
    uint64_t found = 0;
    auto kept = screen_join(profile, threshold2, settings.threads, mine, keep, &found);
    result.candidate_hits += found;
    // The third key (value_profile) among the images in colour, as the whole
    // join has it: hits that neither the hash nor the gray key gave. Both keys'
    // hits are found before any is confirmed, so that the profiles are let go
    // first.
    std::vector<std::pair<uint32_t, uint32_t>> value_kept;
    std::vector<uint32_t> coloured;
    for (uint32_t k = 0; k < n; ++k)
      if (profile[k].colour) coloured.push_back(k);
    if (coloured.size() >= 2) {
      std::vector<MatchProfile> value(coloured.size());
      read(coloured, [&](size_t q, const Thumbnail& th) { value[q] = value_profile(th); });
      value_kept = value_key_hits(coloured, value, profile, threshold2, settings.threads, mine, keep, &result.candidate_hits);
    }
    std::vector<MatchProfile>().swap(profile);
    confirm_kept(kept);
    confirm_kept(value_kept);
  }
  one_link_a_pair(confirmed);
  result.links = std::move(confirmed);
  return result;
}

GroupResult groups_from_links(const std::vector<FileRecord>& records, LookalikeLinks links) {
  GroupResult out;
  const std::vector<uint32_t> eligible = eligible_images(records);
  for (GroupLink& l : links.links) {  // record -> eligible indices (both ascend together)
    const auto a = std::lower_bound(eligible.begin(), eligible.end(), l.a);
    const auto b = std::lower_bound(eligible.begin(), eligible.end(), l.b);
    if (l.a >= l.b || a == eligible.end() || *a != l.a || b == eligible.end() || *b != l.b)
      throw std::invalid_argument("a look-alike pair names a record that is no readable image");
    l.a = static_cast<uint32_t>(a - eligible.begin());
    l.b = static_cast<uint32_t>(b - eligible.begin());
  }
  one_link_a_pair(links.links);
  out.candidate_hits = links.candidate_hits;
  finish_groups(records, eligible, links.links, out);
  return out;
}

}  // namespace tamis
