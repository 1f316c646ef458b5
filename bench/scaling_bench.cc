// How the in-memory stages grow with the number of files (docs/performance.md):
// synthetic records (100 classes, random DCT codes and thumbnails, 1% planted
// look-alike copies), timed through masks, labels, groups, checks, split and the
// output files, with the peak resident memory per record. As in an audit, the
// thumbnails go to a scratch file in /tmp when they would take more than the
// read's default thumbnail memory (ReadOptions), and only the group members'
// are kept after the groups stage.
// Usage: scaling_bench N [THREADS=2] [JOIN_MB=the default of GroupSettings] [THUMB_MB=64]
#include <sys/resource.h>

#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <filesystem>

#include "tamis/base/random.h"
#include "tamis/pipeline/audit.h"
#include "tamis/read/features.h"
#include "tamis/report/outputs.h"

using namespace tamis;
using Clock = std::chrono::steady_clock;

static double seconds_since(Clock::time_point t) { return std::chrono::duration<double>(Clock::now() - t).count(); }
static long peak_kb() {
  rusage u{};
  getrusage(RUSAGE_SELF, &u);
  return u.ru_maxrss;
}

int main(int argc, char** argv) {
  const size_t n = argc > 1 ? std::strtoull(argv[1], nullptr, 10) : 100000;
  const unsigned threads = argc > 2 ? static_cast<unsigned>(std::atoi(argv[2])) : 2;
  const long base_kb = peak_kb();
  auto t0 = Clock::now();
  AuditIndex x;
  x.settings.read.threads = threads;
  // Records are made straight in path order (by class, then number), each
  // thumbnail in its record's slot: nothing is copied or sorted afterwards.
  std::vector<uint32_t> order(n), pos(n);
  for (uint32_t i = 0; i < n; ++i) order[i] = i;
  std::sort(order.begin(), order.end(), [](uint32_t a, uint32_t b) { return a % 100 != b % 100 ? a % 100 < b % 100 : a < b; });
  for (uint32_t k = 0; k < n; ++k) pos[order[k]] = k;
  x.records.resize(n);
  const uint64_t thumb_bytes = argc > 4 ? std::strtoull(argv[4], nullptr, 10) << 20 : ReadOptions{}.thumbnail_memory_bytes;
  if (n * sizeof(Thumbnail) > thumb_bytes)
    x.thumbs.assign_spilled(n, "/tmp");
  else
    x.thumbs.assign_all(n);
  SplitMix64 rng(7);
  for (size_t k = 0; k < n; ++k) {
    const size_t i = order[k];
    FileRecord& r = x.records[k];
    char path[64];
    std::snprintf(path, sizeof path, "class%03zu/img_%08zu.jpg", i % 100, i);
    r.path = path;
    r.size = 200000 + rng.below(100000);
    r.kind = FileKind::image;
    r.probe.format = Format::jpeg;
    r.probe.mode = ColorMode::rgb;
    r.probe.bit_depth = 8;
    r.probe.width = 640;
    r.probe.height = 480;
    r.features.content_hash = {rng.next(), rng.next()};
    r.features.has_content_hash = true;
    r.features.has_lookalike = true;
    Thumbnail thumb;
    for (auto& b : thumb) b = static_cast<uint8_t>(rng.below(256));
    if (i % 100 == 99) {  // a look-alike copy of image i - 1 (class 98: made before)
      r.features.look = x.records[pos[i - 1]].features.look;
      r.features.look.phash[0] ^= 1ULL << rng.below(64);
      x.thumbs.get(pos[i - 1], thumb);
    } else {
      cv::Mat t(32, 32, CV_8UC1, thumb.data());
      r.features.look.phash = dct_hashes(t);
    }
    x.thumbs.put(k, thumb);
    r.features.stats = {120.0f + float(rng.below(40)), 40.0f, 7.0f, 900.0f + float(rng.below(500)), 255, false, 65};
  }
  std::vector<uint32_t>().swap(order);
  std::vector<uint32_t>().swap(pos);
  x.totals = {n, n, 0, 0, 0};
  double t_make = seconds_since(t0);
  const long made_kb = peak_kb();
  t0 = Clock::now();
  x.masks = pair_masks(x.records, {});
  double t_masks = seconds_since(t0);
  t0 = Clock::now();
  x.labels = assign_labels(x.records, x.masks.layout_roots);
  double t_labels = seconds_since(t0);
  t0 = Clock::now();
  GroupSettings gs;
  gs.threads = threads;
  if (argc > 3) gs.join_memory_bytes = std::strtoull(argv[3], nullptr, 10) << 20;
  x.groups = find_groups(x.records, x.thumbs, gs);
  std::vector<uint32_t> shown;
  for (const auto& g : x.groups.groups) shown.insert(shown.end(), g.members.begin(), g.members.end());
  x.thumbs.keep_only(shown);
  double t_groups = seconds_since(t0);
  const long groups_kb = peak_kb();
  t0 = Clock::now();
  AuditResult r = place(std::move(x), SplitSettings{});
  double t_place = seconds_since(t0);
  const long place_kb = peak_kb();
  t0 = Clock::now();
  // The real outputs (manifest.csv, report.json, report.html, index.cbor), into a
  // temporary folder removed afterwards.
  char dir_template[] = "/tmp/tamis-scaling-XXXXXX";
  if (!mkdtemp(dir_template)) return 1;
  const std::filesystem::path out_dir = dir_template;
  write_outputs(out_dir, r);
  double t_outputs = seconds_since(t0);
  uintmax_t out_bytes = 0;
  for (const auto& e : std::filesystem::directory_iterator(out_dir)) out_bytes += e.file_size();
  std::filesystem::remove_all(out_dir);
  const long peak = peak_kb();
  auto per = [&](long kb) { return (kb - base_kb) * 1024.0 / double(n); };
  std::printf("peak bytes per record: records made %.0f, after groups %.0f, after checks+split %.0f, after outputs %.0f\n",
              per(made_kb), per(groups_kb), per(place_kb), per(peak));
  std::printf("%zu records: make %.2f s, masks %.2f s, labels %.2f s, groups %.2f s (%zu groups), checks+split %.2f s, "
              "outputs %.2f s (%.1f MB); peak RSS %.0f MB, %.0f bytes per record\n",
              n, t_make, t_masks, t_labels, t_groups, r.groups.groups.size(), t_place, t_outputs,
              double(out_bytes) / 1e6, peak / 1024.0, (peak - base_kb) * 1024.0 / double(n));
  return 0;
}
