// The look-alike stage alone on a real tree (docs/performance.md): reads ROOT
// once through a record cache (CACHE, filled on the first run), then times the
// candidate join and the whole find_groups REPEATS times each.
// Usage: groups_bench ROOT CACHE [THREADS=2] [REPEATS=3] [JOIN_MB=the default of GroupSettings]
#include <algorithm>
#include <chrono>
#include <cstdio>
#include <cstdlib>

#include "tamis/read/cache.h"
#include "tamis/read/read_stage.h"
#include "tamis/read/walk.h"
#include "tamis/relate/groups.h"
#include "tamis/relate/lookalike_index.h"

using namespace tamis;
using Clock = std::chrono::steady_clock;

static double seconds_since(Clock::time_point t) { return std::chrono::duration<double>(Clock::now() - t).count(); }

int main(int argc, char** argv) {
  if (argc < 3) {
    std::fprintf(stderr, "usage: groups_bench ROOT CACHE [THREADS=2] [REPEATS=3]\n");
    return 2;
  }
  const unsigned threads = argc > 3 ? static_cast<unsigned>(std::atoi(argv[3])) : 2;
  const int repeats = argc > 4 ? std::atoi(argv[4]) : 3;
  WalkResult w = walk_tree(argv[1]);
  RecordCache cache(argv[2], argv[1], "groups_bench");
  ReadOptions ro;
  ro.threads = threads;
  ReadContext ctx;
  ctx.cache = &cache;
  std::vector<int64_t> thumbnail_row;
  ctx.thumbnail_row = &thumbnail_row;
  ThumbnailTable thumbs;
  ctx.thumbs = &thumbs;
  std::vector<FileRecord> records = read_files(argv[1], w.files, ro, ctx);
  std::vector<uint32_t> all(records.size());
  for (uint32_t i = 0; i < all.size(); ++i) all[i] = i;
  if (!cache.load_thumbnails(thumbs, thumbnail_row, all).empty()) return 1;  // the join needs every thumbnail
  cache.store(records, thumbs);
  GroupSettings gs;
  gs.threads = threads;
  if (argc > 5) gs.join_memory_bytes = std::strtoull(argv[5], nullptr, 10) << 20;
  if (const char* r = getenv("SCREEN_RADIUS")) gs.screen_radius = std::atof(r);
  std::vector<uint64_t> identity, variants;
  for (const auto& r : records)
    if (r.kind == FileKind::image && r.features.has_lookalike) {
      identity.push_back(r.features.look.phash[0]);
      variants.insert(variants.end(), r.features.look.phash.begin(), r.features.look.phash.end());
    }
  auto distinct = [](std::vector<uint64_t> v) {
    std::sort(v.begin(), v.end());
    return static_cast<size_t>(std::unique(v.begin(), v.end()) - v.begin());
  };
  std::printf("%zu images; distinct codes: %zu identity, %zu of all flips/turns\n", identity.size(),
              distinct(identity), distinct(variants));
  for (int k = 0; k < repeats; ++k) {
    auto t0 = Clock::now();
    auto hits = getenv("NOJOIN") ? std::vector<std::pair<uint32_t, uint32_t>>{} : join_within(variants, identity, gs.radius, threads);
    double t_join = seconds_since(t0);
    t0 = Clock::now();
    GroupResult g = find_groups(records, thumbs, gs);
    double t_groups = seconds_since(t0);
    size_t grouped = 0;
    for (const auto& grp : g.groups) grouped += grp.members.size();
    std::printf("join %.3f s (%zu hits); find_groups %.3f s: %llu candidate hits, %llu confirmed pairs, %zu groups, %zu images grouped (screen radius %.3f)\n",
                t_join, hits.size(), t_groups, (unsigned long long)g.candidate_hits,
                (unsigned long long)g.confirmed_pairs, g.groups.size(), grouped, gs.screen_radius);
  }
  return 0;
}
