// Synthetic scan parts for the scale-out memory figures (docs/scale-out.md):
// N records of 640x480 JPEGs in 100 classes, random thumbnails with their DCT
// codes, 1% planted look-alike copies (image i, i % 100 == 99, copies image
// i - 1 with one bit of its hash flipped), cut into P parts by the scan's own
// shard rule (read/shard.h) and written as `tamis scan` writes them. Each
// record is made from a generator seeded with its number, so a part is made
// alone: memory is one part's records and thumbnails, whatever N.
// Usage: synthetic_parts N P DIR   (writes DIR/0.part .. DIR/(P-1).part; DIR outside any ROOT)
#include <sys/resource.h>

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <fstream>

#include "tamis/base/random.h"
#include "tamis/read/features.h"
#include "tamis/read/part_file.h"
#include "tamis/read/tree_reader.h"
#include "tamis/version.h"

using namespace tamis;

namespace {

std::string path_of(size_t i) {
  char path[64];
  std::snprintf(path, sizeof path, "class%03zu/img_%08zu.jpg", i % 100, i);
  return path;
}

// Record i and its thumbnail, from a generator seeded with i.
void make(size_t i, FileRecord& r, Thumbnail& thumb) {
  SplitMix64 rng(0x5eed0000ULL + i);
  r.path = path_of(i);
  r.size = 200000 + rng.below(100000);
  r.mtime_ns = 1'700'000'000'000'000'000LL + static_cast<int64_t>(i);
  r.inode = 1000 + i;
  r.kind = FileKind::image;
  r.probe.format = Format::jpeg;
  r.probe.mode = ColorMode::rgb;
  r.probe.bit_depth = 8;
  r.probe.width = 640;
  r.probe.height = 480;
  r.features.content_hash = {rng.next(), rng.next()};
  r.features.has_content_hash = true;
  r.features.has_lookalike = true;
  r.features.stats = {120.0f + float(rng.below(40)), 40.0f, 7.0f, 900.0f + float(rng.below(500)), 255, false, 65};
  if (i % 100 == 99 && i > 0) {  // a look-alike copy of image i - 1
    FileRecord source;
    make(i - 1, source, thumb);
    r.features.look = source.features.look;
    r.features.look.phash[0] ^= 1ULL << rng.below(64);
    return;
  }
  for (auto& b : thumb) b = static_cast<uint8_t>(rng.below(256));
  cv::Mat t(32, 32, CV_8UC1, thumb.data());
  r.features.look.phash = dct_hashes(t);
}

}  // namespace

int main(int argc, char** argv) {
  if (argc != 4) {
    std::fprintf(stderr, "usage: synthetic_parts N P DIR\n");
    return 2;
  }
  const size_t n = std::strtoull(argv[1], nullptr, 10);
  const uint32_t parts = static_cast<uint32_t>(std::strtoul(argv[2], nullptr, 10));
  const std::filesystem::path dir = argv[3];
  std::filesystem::create_directories(dir);
  const auto t0 = std::chrono::steady_clock::now();
  ReadOptions read;
  for (uint32_t k = 0; k < parts; ++k) {
    ScanPart p;
    p.root = "/synthetic/root";
    p.decode = read.decode;
    p.max_bytes = read.max_bytes;
    p.read_key = reading_key(read);
    p.tool = kToolVersion;
    p.shard = {k, parts};
    std::vector<std::pair<std::string, size_t>> mine;
    for (size_t i = 0; i < n; ++i) {
      std::string path = path_of(i);
      if (shard_of(path, parts) == k) mine.push_back({std::move(path), i});
    }
    std::sort(mine.begin(), mine.end());
    p.records.resize(mine.size());
    p.thumbs.assign_all(mine.size());
    for (size_t q = 0; q < mine.size(); ++q) make(mine[q].second, p.records[q], p.thumbs.at(q));
    for (uint32_t c = 0; c < 100; ++c) {
      char d[16];
      std::snprintf(d, sizeof d, "class%03u", c);
      if (shard_of(d, parts) == k) p.walk.dirs.push_back(d);
    }
    p.counts.read = mine.size();
    std::ofstream os(dir / (std::to_string(k) + ".part"), std::ios::binary);
    write_part(os, p);
    if (!os) return 3;
  }
  rusage u{};
  getrusage(RUSAGE_SELF, &u);
  std::printf("%zu records in %u parts: %.1f s, peak RSS %.0f MB\n", n, parts,
              std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count(), u.ru_maxrss / 1024.0);
  return 0;
}
